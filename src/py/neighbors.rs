//! Wrappers for distance matrices and brute-force neighbour queries.
//!
//! Result dtype (SPEC): distances are float32 when every array input is
//! float32, float64 otherwise, decided by `crate::batch::wants_f32` (the one
//! written rule); they are always computed in float64 and rounded once.

use std::mem::MaybeUninit;

use numpy::{IntoPyArray, PyArray1, PyArray2, PyArrayMethods, PyUntypedArrayMethods};
use pyo3::exceptions::{PyTypeError, PyValueError};
use pyo3::prelude::*;

use super::coerce::{coerce, coerce_opt, Arg};
use crate::batch::{wants_f32, Data, Operand};
use crate::models::ball::Curvature;
use crate::models::Model;
use crate::pairwise::matrix::{self, Store};
use crate::pairwise::Prepared;

fn prepare(model: Model, c: Curvature, name: &'static str, d: Data<'_>) -> crate::error::Result<Prepared> {
    Prepared::new(model, c, name, &d)
}

/// Whether the distances of a call with these point arguments are float32.
fn f32_result(args: &[&Arg]) -> bool {
    let ops: Vec<Operand> = args.iter().map(|a| Operand::point("x", a.data())).collect();
    wants_f32(&ops)
}

/// Distances computed in float64 as an `(n, m)` array of the result dtype.
pub(super) fn distances_2d(py: Python<'_>, n: usize, m: usize, d: Vec<f64>, f32: bool) -> PyResult<Bound<'_, PyAny>> {
    fn shaped<T>(n: usize, m: usize, v: Vec<T>) -> PyResult<ndarray::Array2<T>> {
        ndarray::Array2::from_shape_vec((n, m), v)
            .map_err(|e| PyValueError::new_err(format!("internal error: result shape ({n}, {m}): {e}")))
    }
    Ok(if f32 {
        let v: Vec<f32> = py.detach(|| d.iter().map(|&x| x as f32).collect());
        shaped(n, m, v)?.into_pyarray(py).into_any()
    } else {
        shaped(n, m, d)?.into_pyarray(py).into_any()
    })
}

/// Distances computed in float64 as a 1-D array of the result dtype.
pub(super) fn distances_1d(py: Python<'_>, d: Vec<f64>, f32: bool) -> PyResult<Bound<'_, PyAny>> {
    Ok(if f32 {
        let v: Vec<f32> = py.detach(|| d.iter().map(|&x| x as f32).collect());
        PyArray1::from_vec(py, v).into_any()
    } else {
        PyArray1::from_vec(py, d).into_any()
    })
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
        Some(ya) => f32_result(&[&xa, ya]),
        None => f32_result(&[&xa]),
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
            let y = pyo.as_ref().unwrap_or(&px);
            Ok(if f32_out {
                fresh_matrix::<f32>(py, &px, y)?.into_any().unbind()
            } else {
                fresh_matrix::<f64>(py, &px, y)?.into_any().unbind()
            })
        }
    }
}

/// One element of a fresh output buffer: a `MaybeUninit`, so that a slice
/// of them may cover memory nobody has written yet (a `&mut [f64]` over
/// uninitialised floats would be undefined behaviour). The matrix kernel
/// only ever stores whole elements into its output, through [`Store`].
#[derive(Clone, Copy)]
#[repr(transparent)]
struct Slot<T: Copy>(MaybeUninit<T>);

impl<T: Store> Default for Slot<T> {
    fn default() -> Self {
        Slot(MaybeUninit::uninit())
    }
}

impl<T: Store> Store for Slot<T> {
    #[inline(always)]
    fn from_f64(v: f64) -> Self {
        Slot(MaybeUninit::new(T::from_f64(v)))
    }
}

/// The `(x.n, y.n)` distance matrix in a new C-contiguous NumPy array,
/// written once by the kernel: not zero-filled first (zero-filling the
/// 32 MB of a 2000 x 2000 matrix cost 30-50 % of the d = 2 matrix time,
/// measured), not copied afterwards.
fn fresh_matrix<'py, T: Store + numpy::Element>(
    py: Python<'py>,
    x: &Prepared,
    y: &Prepared,
) -> PyResult<Bound<'py, PyArray2<T>>> {
    let (n, m) = (x.n, y.n);
    let len = n
        .checked_mul(m)
        .ok_or_else(|| PyValueError::new_err(format!("a ({n}, {m}) distance matrix would not fit in memory")))?;
    // SAFETY: NumPy allocates a C-contiguous, suitably aligned (n, m) array
    // and leaves its elements uninitialised. That is sound here because no
    // reference to them as `T` is ever made: the kernel sees them as
    // `Slot<T>` (a `MaybeUninit`), and the array reaches Python only after
    // the kernel has returned Ok, having stored every one of the n m
    // elements (its contract, checked by the matrix tests against the
    // element-wise distances); on an error it is dropped unread.
    let arr = unsafe { PyArray2::<T>::new(py, [n, m], false) };
    if len > 0 {
        // SAFETY: the pointer is the start of the array's own buffer of
        // `len` elements of `T` (fresh, C-contiguous, aligned for `T`), and
        // `Slot<T>` is `repr(transparent)` over `MaybeUninit<T>`, so it has
        // the layout of `T` and admits uninitialised bytes. The array was
        // just created and is not yet visible to Python or to any other
        // Rust reference, so this is the only access to the buffer for the
        // lifetime of `out`.
        let out: &mut [Slot<T>] = unsafe { std::slice::from_raw_parts_mut(arr.data() as *mut Slot<T>, len) };
        py.detach(|| matrix::distance_matrix_into(x, y, out))?;
    }
    Ok(arr)
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
    let f32_out = f32_result(&[&xa]);
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
    // A (0, k) result (empty x, y=None) with 8 k bytes per row beyond
    // isize::MAX has strides that overflow, and NumPy crashes on it (fuzz
    // run: segfault for k = 2^62); no set of points has that many candidates.
    if v > 1 << 59 {
        return Err(PyValueError::new_err(format!("k must be at most 2^59, got {v}")));
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
    let f32_out = match &ya {
        Some(ya) => f32_result(&[&xa, ya]),
        None => f32_result(&[&xa]),
    };
    let xd = xa.data();
    let yd = ya.as_ref().map(|a| a.data());
    let (idx, dist, n) = py.detach(move || -> crate::error::Result<_> {
        let px = prepare(md, c, "x", xd)?;
        let (i, d) = match yd {
            // k is checked against y's rows even when x is empty.
            Some(d) => {
                let py_ = prepare(md, c, "y", d)?;
                matrix::knn(&px, &py_, k, false)?
            }
            // y=None with an empty x: no query row, so no row lacks
            // candidates; the result is (0, k) like any empty query set.
            None if px.n == 0 => (Vec::new(), Vec::new()),
            None => matrix::knn(&px, &px, k, true)?,
        };
        Ok((i, d, px.n))
    })?;
    let i = ndarray::Array2::from_shape_vec((n, k), idx)
        .map_err(|e| PyValueError::new_err(format!("internal error: result shape ({n}, {k}): {e}")))?
        .into_pyarray(py);
    let d = distances_2d(py, n, k, dist, f32_out)?;
    Ok((i.into_any().unbind(), d.unbind()))
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
    let f32_out = match &ya {
        Some(ya) => f32_result(&[&xa, ya]),
        None => f32_result(&[&xa]),
    };
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
        distances_1d(py, d, f32_out)?.unbind(),
    ))
}

pub fn register(m: &Bound<'_, PyModule>) -> PyResult<()> {
    m.add_function(wrap_pyfunction!(distance_matrix, m)?)?;
    m.add_function(wrap_pyfunction!(condensed_distances, m)?)?;
    m.add_function(wrap_pyfunction!(knn, m)?)?;
    m.add_function(wrap_pyfunction!(radius_neighbors, m)?)?;
    Ok(())
}
