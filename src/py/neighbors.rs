//! Wrappers for distance matrices and brute-force neighbour queries.

use numpy::{IntoPyArray, PyArray2, PyArrayMethods, PyUntypedArrayMethods};
use pyo3::exceptions::{PyTypeError, PyValueError};
use pyo3::prelude::*;

use super::coerce::{coerce, coerce_opt, Arg};
use crate::batch::Data;
use crate::models::ball::Curvature;
use crate::models::Model;
use crate::pairwise::matrix;
use crate::pairwise::Prepared;

fn prepare(model: Model, c: Curvature, name: &'static str, d: Data<'_>) -> crate::error::Result<Prepared> {
    Prepared::new(model, c, name, &d)
}

fn all_f32(args: &[&Arg]) -> bool {
    args.iter().all(|a| matches!(a.data(), Data::F32(_)))
}

#[pyfunction]
#[pyo3(signature = (x, y = None, model = "poincare", curvature = -1.0, out = None))]
fn distance_matrix<'py>(
    py: Python<'py>,
    x: &Bound<'py, PyAny>,
    y: Option<&Bound<'py, PyAny>>,
    model: &str,
    curvature: f64,
    out: Option<&Bound<'py, PyAny>>,
) -> PyResult<Py<PyAny>> {
    let c = Curvature::new(curvature)?;
    let md = Model::parse(model, "model")?;
    let xa = coerce(py, "x", x)?;
    let ya = coerce_opt(py, "y", y)?;
    let f32_out = match &ya {
        Some(ya) => all_f32(&[&xa, ya]),
        None => all_f32(&[&xa]),
    };
    let xd = xa.data();
    let yd = ya.as_ref().map(|a| a.data());
    let prep = move || -> crate::error::Result<(Prepared, Option<Prepared>)> {
        let px = prepare(md, c, "x", xd)?;
        let py_ = match yd {
            Some(d) => Some(prepare(md, c, "y", d)?),
            None => None,
        };
        Ok((px, py_))
    };
    let (px, pyo) = py.detach(prep)?;
    let (n, m) = (px.n, pyo.as_ref().map_or(px.n, |p| p.n));
    match out {
        Some(o) if !o.is_none() => {
            if let Ok(arr) = o.cast::<PyArray2<f64>>() {
                check_out(arr.shape(), arr.is_c_contiguous(), n, m)?;
                let mut rw =
                    arr.try_readwrite().map_err(|e| PyValueError::new_err(format!("out is not writeable: {e}")))?;
                let sl = rw.as_slice_mut().map_err(|_| PyValueError::new_err("out must be C-contiguous"))?;
                py.detach(|| matrix::distance_matrix_into(&px, pyo.as_ref().unwrap_or(&px), sl))?;
            } else if let Ok(arr) = o.cast::<PyArray2<f32>>() {
                check_out(arr.shape(), arr.is_c_contiguous(), n, m)?;
                let mut rw =
                    arr.try_readwrite().map_err(|e| PyValueError::new_err(format!("out is not writeable: {e}")))?;
                let sl = rw.as_slice_mut().map_err(|_| PyValueError::new_err("out must be C-contiguous"))?;
                py.detach(|| matrix::distance_matrix_into(&px, pyo.as_ref().unwrap_or(&px), sl))?;
            } else {
                return Err(PyTypeError::new_err(
                    "out must be a 2-D NumPy array of dtype float64 or float32 (native byte order)",
                ));
            }
            Ok(o.clone().unbind())
        }
        _ => {
            if f32_out {
                let arr = fresh::<f32>(py, n, m);
                {
                    let mut rw = arr.readwrite();
                    let sl = rw.as_slice_mut().expect("fresh arrays are contiguous");
                    py.detach(|| matrix::distance_matrix_into(&px, pyo.as_ref().unwrap_or(&px), sl))?;
                }
                Ok(arr.into_any().unbind())
            } else {
                let arr = fresh::<f64>(py, n, m);
                {
                    let mut rw = arr.readwrite();
                    let sl = rw.as_slice_mut().expect("fresh arrays are contiguous");
                    py.detach(|| matrix::distance_matrix_into(&px, pyo.as_ref().unwrap_or(&px), sl))?;
                }
                Ok(arr.into_any().unbind())
            }
        }
    }
}

/// A new C-contiguous `(n, m)` array, not zero-filled: the kernels write
/// every element before anything reads it (zero-filling 32 MB costs as much
/// as a d = 2 distance matrix of that size).
fn fresh<T: numpy::Element>(py: Python<'_>, n: usize, m: usize) -> Bound<'_, PyArray2<T>> {
    // SAFETY: every element is written by distance_matrix_into before the
    // array is handed to Python; on error the array is dropped unread.
    unsafe { PyArray2::<T>::new(py, [n, m], false) }
}

fn check_out(shape: &[usize], contiguous: bool, n: usize, m: usize) -> PyResult<()> {
    if shape != [n, m] {
        return Err(PyValueError::new_err(format!("out has shape {shape:?}; expected ({n}, {m})")));
    }
    if !contiguous {
        return Err(PyValueError::new_err("out must be C-contiguous"));
    }
    Ok(())
}

#[pyfunction]
#[pyo3(signature = (x, model = "poincare", curvature = -1.0))]
fn condensed_distances(py: Python<'_>, x: &Bound<'_, PyAny>, model: &str, curvature: f64) -> PyResult<Py<PyAny>> {
    let c = Curvature::new(curvature)?;
    let md = Model::parse(model, "model")?;
    let xa = coerce(py, "x", x)?;
    let f32_out = all_f32(&[&xa]);
    let xd = xa.data();
    let px = py.detach(move || prepare(md, c, "x", xd))?;
    let len = px.n * px.n.saturating_sub(1) / 2;
    if f32_out {
        let mut v = vec![0f32; len];
        py.detach(|| matrix::condensed_into(&px, &mut v))?;
        Ok(v.into_pyarray(py).into_any().unbind())
    } else {
        let mut v = vec![0f64; len];
        py.detach(|| matrix::condensed_into(&px, &mut v))?;
        Ok(v.into_pyarray(py).into_any().unbind())
    }
}

fn k_arg(k: &Bound<'_, PyAny>) -> PyResult<usize> {
    let v: i64 = k.extract().map_err(|_| PyTypeError::new_err("k must be an integer"))?;
    if v < 1 {
        return Err(PyValueError::new_err(format!("k must be at least 1, got {v}")));
    }
    Ok(v as usize)
}

#[pyfunction]
#[pyo3(signature = (x, k, y = None, model = "poincare", curvature = -1.0))]
fn knn(
    py: Python<'_>,
    x: &Bound<'_, PyAny>,
    k: &Bound<'_, PyAny>,
    y: Option<&Bound<'_, PyAny>>,
    model: &str,
    curvature: f64,
) -> PyResult<(Py<PyAny>, Py<PyAny>)> {
    let c = Curvature::new(curvature)?;
    let md = Model::parse(model, "model")?;
    let k = k_arg(k)?;
    let xa = coerce(py, "x", x)?;
    let ya = coerce_opt(py, "y", y)?;
    let xd = xa.data();
    let yd = ya.as_ref().map(|a| a.data());
    let (idx, dist, n) = py.detach(move || -> crate::error::Result<_> {
        let px = prepare(md, c, "x", xd)?;
        let (i, d) = match yd {
            Some(d) => {
                let py_ = prepare(md, c, "y", d)?;
                matrix::knn(&px, &py_, k, false)?
            }
            None => matrix::knn(&px, &px, k, true)?,
        };
        Ok((i, d, px.n))
    })?;
    let i = ndarray::Array2::from_shape_vec((n, k), idx).expect("shape").into_pyarray(py);
    let d = ndarray::Array2::from_shape_vec((n, k), dist).expect("shape").into_pyarray(py);
    Ok((i.into_any().unbind(), d.into_any().unbind()))
}

#[pyfunction]
#[pyo3(signature = (x, r, y = None, model = "poincare", curvature = -1.0))]
fn radius_neighbors(
    py: Python<'_>,
    x: &Bound<'_, PyAny>,
    r: f64,
    y: Option<&Bound<'_, PyAny>>,
    model: &str,
    curvature: f64,
) -> PyResult<(Py<PyAny>, Py<PyAny>, Py<PyAny>)> {
    let c = Curvature::new(curvature)?;
    let md = Model::parse(model, "model")?;
    let xa = coerce(py, "x", x)?;
    let ya = coerce_opt(py, "y", y)?;
    let xd = xa.data();
    let yd = ya.as_ref().map(|a| a.data());
    let (p, i, d) = py.detach(move || -> crate::error::Result<_> {
        let px = prepare(md, c, "x", xd)?;
        match yd {
            Some(d) => {
                let py_ = prepare(md, c, "y", d)?;
                matrix::radius_neighbors(&px, &py_, r, false)
            }
            None => matrix::radius_neighbors(&px, &px, r, true),
        }
    })?;
    Ok((
        p.into_pyarray(py).into_any().unbind(),
        i.into_pyarray(py).into_any().unbind(),
        d.into_pyarray(py).into_any().unbind(),
    ))
}

pub fn register(m: &Bound<'_, PyModule>) -> PyResult<()> {
    m.add_function(wrap_pyfunction!(distance_matrix, m)?)?;
    m.add_function(wrap_pyfunction!(condensed_distances, m)?)?;
    m.add_function(wrap_pyfunction!(knn, m)?)?;
    m.add_function(wrap_pyfunction!(radius_neighbors, m)?)?;
    Ok(())
}
