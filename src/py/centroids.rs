//! Wrappers for Fréchet means, Einstein midpoints and Fréchet variances.

use numpy::{IntoPyArray, PyReadonlyArray1};
use pyo3::exceptions::{PyTypeError, PyValueError};
use pyo3::prelude::*;

use super::coerce::coerce;
use crate::batch::Data;
use crate::models::ball::Curvature;
use crate::models::Model;
use crate::stats::centroids;

pub(crate) fn weights_arg(py: Python<'_>, w: Option<&Bound<'_, PyAny>>) -> PyResult<Option<Vec<f64>>> {
    match w {
        Some(w) if !w.is_none() => {
            let a = coerce(py, "weights", w)?;
            let d = a.data();
            if d.shape().len() != 1 {
                return Err(PyValueError::new_err(format!(
                    "weights must be 1-D (one weight per point), got shape {:?}",
                    d.shape()
                )));
            }
            Ok(Some(match d {
                Data::F64(v) | Data::Weak(v) => v.iter().copied().collect(),
                Data::F32(v) => v.iter().map(|&x| f64::from(x)).collect(),
            }))
        }
        _ => Ok(None),
    }
}

pub(crate) fn labels_arg(py: Python<'_>, l: Option<&Bound<'_, PyAny>>) -> PyResult<Option<Vec<i64>>> {
    match l {
        Some(l) if !l.is_none() => {
            let np = py.import("numpy")?;
            let arr = np.call_method1("asarray", (l,))?;
            let kind: String = arr.getattr("dtype")?.getattr("kind")?.extract()?;
            if kind != "i" && kind != "u" {
                return Err(PyTypeError::new_err(format!(
                    "labels must be integers, got an array of dtype kind {kind:?}"
                )));
            }
            let arr = arr.call_method1("astype", ("int64",))?;
            let a: PyReadonlyArray1<'_, i64> = arr
                .extract()
                .map_err(|_| PyValueError::new_err("labels must be a 1-D integer array (one label per point)"))?;
            Ok(Some(a.as_array().iter().copied().collect()))
        }
        _ => Ok(None),
    }
}

#[pyfunction]
#[pyo3(signature = (x, weights = None, labels = None, model = "poincare", curvature = -1.0, tol = 1e-12, max_iter = 50))]
#[allow(clippy::type_complexity)]
fn frechet_mean(
    py: Python<'_>,
    x: &Bound<'_, PyAny>,
    weights: Option<&Bound<'_, PyAny>>,
    labels: Option<&Bound<'_, PyAny>>,
    model: &str,
    curvature: f64,
    tol: f64,
    max_iter: usize,
) -> PyResult<(Py<PyAny>, Py<PyAny>, Py<PyAny>, Py<PyAny>, Py<PyAny>)> {
    let k = Curvature::new(curvature)?;
    let md = Model::parse(model, "model")?;
    let xa = coerce(py, "x", x)?;
    let w = weights_arg(py, weights)?;
    let l = labels_arg(py, labels)?;
    let xd = xa.data();
    let r = py.detach(move || centroids::frechet_mean(md, k, &xd, w.as_deref(), l.as_deref(), tol, max_iter))?;
    let g = r.labels.len();
    let mean = ndarray::Array2::from_shape_vec((g, r.width), r.mean).expect("shape").into_pyarray(py);
    let it: Vec<i64> = r.iterations.iter().map(|&v| v as i64).collect();
    Ok((
        mean.into_any().unbind(),
        r.labels.into_pyarray(py).into_any().unbind(),
        it.into_pyarray(py).into_any().unbind(),
        r.converged.into_pyarray(py).into_any().unbind(),
        r.grad_norm.into_pyarray(py).into_any().unbind(),
    ))
}

#[pyfunction]
#[pyo3(signature = (x, weights = None, labels = None, model = "poincare", curvature = -1.0))]
fn einstein_midpoint(
    py: Python<'_>,
    x: &Bound<'_, PyAny>,
    weights: Option<&Bound<'_, PyAny>>,
    labels: Option<&Bound<'_, PyAny>>,
    model: &str,
    curvature: f64,
) -> PyResult<(Py<PyAny>, Py<PyAny>)> {
    let k = Curvature::new(curvature)?;
    let md = Model::parse(model, "model")?;
    let xa = coerce(py, "x", x)?;
    let w = weights_arg(py, weights)?;
    let l = labels_arg(py, labels)?;
    let xd = xa.data();
    let (keys, mean, width) =
        py.detach(move || centroids::einstein_midpoint(md, k, &xd, w.as_deref(), l.as_deref()))?;
    let g = keys.len();
    let mean = ndarray::Array2::from_shape_vec((g, width), mean).expect("shape").into_pyarray(py);
    Ok((mean.into_any().unbind(), keys.into_pyarray(py).into_any().unbind()))
}

/// Per-label Fréchet variances: `(labels, variances)`. `center=None` takes
/// each group's Fréchet mean; a 1-D center is used for every group, a 2-D
/// one gives one center per label (rows in label order).
#[pyfunction]
#[pyo3(signature = (x, center = None, weights = None, labels = None, model = "poincare", curvature = -1.0, tol = 1e-12, max_iter = 50))]
fn frechet_variance(
    py: Python<'_>,
    x: &Bound<'_, PyAny>,
    center: Option<&Bound<'_, PyAny>>,
    weights: Option<&Bound<'_, PyAny>>,
    labels: Option<&Bound<'_, PyAny>>,
    model: &str,
    curvature: f64,
    tol: f64,
    max_iter: usize,
) -> PyResult<(Py<PyAny>, Py<PyAny>)> {
    let k = Curvature::new(curvature)?;
    let md = Model::parse(model, "model")?;
    let xa = coerce(py, "x", x)?;
    let given = match center {
        Some(c) if !c.is_none() => {
            let ca = coerce(py, "center", c)?;
            let d = ca.data();
            let rows = match d.shape().len() {
                1 => 1,
                2 => d.shape()[0],
                _ => {
                    return Err(PyValueError::new_err(format!(
                        "center must be one point (1-D) or one point per label (2-D), got shape {:?}",
                        d.shape()
                    )))
                }
            };
            let v: Vec<f64> = match d {
                Data::F64(v) | Data::Weak(v) => v.iter().copied().collect(),
                Data::F32(v) => v.iter().map(|&x| f64::from(x)).collect(),
            };
            Some((v, rows))
        }
        _ => None,
    };
    let w = weights_arg(py, weights)?;
    let l = labels_arg(py, labels)?;
    let xd = xa.data();
    let (keys, var) = py.detach(move || {
        let c = match &given {
            Some((v, rows)) => centroids::Center::Given { coords: v, rows: *rows },
            None => centroids::Center::Mean { tol, max_iter },
        };
        centroids::frechet_variance(md, k, &xd, c, w.as_deref(), l.as_deref())
    })?;
    Ok((keys.into_pyarray(py).into_any().unbind(), var.into_pyarray(py).into_any().unbind()))
}

pub fn register(m: &Bound<'_, PyModule>) -> PyResult<()> {
    m.add_function(wrap_pyfunction!(frechet_mean, m)?)?;
    m.add_function(wrap_pyfunction!(einstein_midpoint, m)?)?;
    m.add_function(wrap_pyfunction!(frechet_variance, m)?)?;
    Ok(())
}
