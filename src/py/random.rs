//! Wrappers for sampling: the wrapped normal (samples and log-density) and
//! the uniform distribution on a hyperbolic ball.

use numpy::IntoPyArray;
use pyo3::prelude::*;

use super::coerce::{coerce, to_py};
use crate::batch::Data;
use crate::error::Error;
use crate::models::ball::Curvature;
use crate::models::Model;
use crate::random;

/// A small array argument as a flat float64 vector of the given rank.
fn flat(name: &str, d: &Data, ndim: usize) -> PyResult<(Vec<f64>, Vec<usize>, bool)> {
    let shape = d.shape().to_vec();
    if shape.len() != ndim {
        let what = if ndim == 1 { "one point, shape (w,)" } else { "a matrix, shape (d, d)" };
        return Err(Error::Value(format!("{name} must be {what}; got shape {shape:?}")).into());
    }
    let (v, f32): (Vec<f64>, bool) = match d {
        Data::F64(a) | Data::Weak(a) => (a.iter().copied().collect(), false),
        Data::F32(a) => (a.iter().map(|&x| f64::from(x)).collect(), true),
    };
    Ok((v, shape, f32))
}

#[pyfunction]
#[pyo3(signature = (mean, cov, n, model, curvature, seed))]
fn wrapped_normal(
    py: Python<'_>,
    mean: &Bound<'_, PyAny>,
    cov: &Bound<'_, PyAny>,
    n: usize,
    model: &str,
    curvature: f64,
    seed: u64,
) -> PyResult<Py<PyAny>> {
    let m = Model::parse(model, "model")?;
    let k = Curvature::new(curvature)?;
    let (ma, ca) = (coerce(py, "mean", mean)?, coerce(py, "cov", cov)?);
    let (mv, _, _) = flat("mean", &ma.data(), 1)?;
    let (cv, _, _) = flat("cov", &ca.data(), 2)?;
    let out = py.detach(move || random::wrapped_normal(m, k, &mv, &cv, n, seed))?;
    Ok(out.into_pyarray(py).into_any().unbind())
}

#[pyfunction]
#[pyo3(signature = (x, mean, cov, model, curvature))]
fn wrapped_normal_logpdf(
    py: Python<'_>,
    x: &Bound<'_, PyAny>,
    mean: &Bound<'_, PyAny>,
    cov: &Bound<'_, PyAny>,
    model: &str,
    curvature: f64,
) -> PyResult<Py<PyAny>> {
    let m = Model::parse(model, "model")?;
    let k = Curvature::new(curvature)?;
    let (xa, ma, ca) = (coerce(py, "x", x)?, coerce(py, "mean", mean)?, coerce(py, "cov", cov)?);
    let (mv, _, mf32) = flat("mean", &ma.data(), 1)?;
    let (cv, _, cf32) = flat("cov", &ca.data(), 2)?;
    let xd = xa.data();
    let force = !(mf32 && cf32);
    let out = py.detach(move || random::wrapped_normal_logpdf(m, k, xd, &mv, &cv, force))?;
    to_py(py, out)
}

#[pyfunction]
#[pyo3(signature = (radius, n, dim, model, curvature, seed))]
fn uniform_ball(
    py: Python<'_>,
    radius: f64,
    n: usize,
    dim: usize,
    model: &str,
    curvature: f64,
    seed: u64,
) -> PyResult<Py<PyAny>> {
    let m = Model::parse(model, "model")?;
    let k = Curvature::new(curvature)?;
    let out = py.detach(move || random::uniform_ball(m, k, radius, n, dim, seed))?;
    Ok(out.into_pyarray(py).into_any().unbind())
}

pub fn register(m: &Bound<'_, PyModule>) -> PyResult<()> {
    m.add_function(wrap_pyfunction!(wrapped_normal, m)?)?;
    m.add_function(wrap_pyfunction!(wrapped_normal_logpdf, m)?)?;
    m.add_function(wrap_pyfunction!(uniform_ball, m)?)?;
    Ok(())
}
