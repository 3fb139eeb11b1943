//! Wrappers for the gyrovector algebra of the Poincaré and Klein balls.

use pyo3::prelude::*;

use super::coerce::{coerce, to_py};
use crate::ball::Curvature;
use crate::batch::{Data, Output};
use crate::error::Result;
use crate::{klein, poincare};

type Binary = for<'a> fn(Curvature, Data<'a>, Data<'a>) -> Result<Output>;
type Ternary = for<'a> fn(Curvature, Data<'a>, Data<'a>, Data<'a>) -> Result<Output>;

fn binary(
    py: Python<'_>,
    names: [&str; 2],
    x: &Bound<'_, PyAny>,
    y: &Bound<'_, PyAny>,
    curvature: f64,
    f: Binary,
) -> PyResult<Py<PyAny>> {
    let c = Curvature::new(curvature)?;
    let xa = coerce(py, names[0], x)?;
    let ya = coerce(py, names[1], y)?;
    let (xd, yd) = (xa.data(), ya.data());
    let out = py.detach(move || f(c, xd, yd))?;
    to_py(py, out)
}

fn ternary(
    py: Python<'_>,
    names: [&str; 3],
    a: &Bound<'_, PyAny>,
    b: &Bound<'_, PyAny>,
    v: &Bound<'_, PyAny>,
    curvature: f64,
    f: Ternary,
) -> PyResult<Py<PyAny>> {
    let c = Curvature::new(curvature)?;
    let aa = coerce(py, names[0], a)?;
    let ba = coerce(py, names[1], b)?;
    let va = coerce(py, names[2], v)?;
    let (ad, bd, vd) = (aa.data(), ba.data(), va.data());
    let out = py.detach(move || f(c, ad, bd, vd))?;
    to_py(py, out)
}

macro_rules! binary_fn {
    ($pyname:ident, $core:path, $a:literal, $b:literal) => {
        #[pyfunction]
        #[pyo3(signature = (x, y, curvature = -1.0))]
        fn $pyname(
            py: Python<'_>,
            x: &Bound<'_, PyAny>,
            y: &Bound<'_, PyAny>,
            curvature: f64,
        ) -> PyResult<Py<PyAny>> {
            binary(py, [$a, $b], x, y, curvature, $core)
        }
    };
}

binary_fn!(poincare_add, poincare::add_arrays, "x", "y");
binary_fn!(poincare_sub, poincare::sub_arrays, "x", "y");
binary_fn!(poincare_coadd, poincare::coadd_arrays, "x", "y");
binary_fn!(poincare_midpoint, poincare::midpoint_arrays, "x", "y");
binary_fn!(poincare_scale, poincare::scale_arrays, "r", "x");
binary_fn!(klein_add, klein::add_arrays, "x", "y");
binary_fn!(klein_sub, klein::sub_arrays, "x", "y");
binary_fn!(klein_midpoint, klein::midpoint_arrays, "x", "y");
binary_fn!(klein_scale, klein::scale_arrays, "r", "x");

#[pyfunction]
#[pyo3(signature = (a, b, v, curvature = -1.0))]
fn poincare_gyration(
    py: Python<'_>,
    a: &Bound<'_, PyAny>,
    b: &Bound<'_, PyAny>,
    v: &Bound<'_, PyAny>,
    curvature: f64,
) -> PyResult<Py<PyAny>> {
    ternary(py, ["a", "b", "v"], a, b, v, curvature, poincare::gyration_arrays)
}

#[pyfunction]
#[pyo3(signature = (a, b, v, curvature = -1.0))]
fn klein_gyration(
    py: Python<'_>,
    a: &Bound<'_, PyAny>,
    b: &Bound<'_, PyAny>,
    v: &Bound<'_, PyAny>,
    curvature: f64,
) -> PyResult<Py<PyAny>> {
    ternary(py, ["a", "b", "v"], a, b, v, curvature, klein::gyration_arrays)
}

pub fn register(m: &Bound<'_, PyModule>) -> PyResult<()> {
    m.add_function(wrap_pyfunction!(poincare_add, m)?)?;
    m.add_function(wrap_pyfunction!(poincare_sub, m)?)?;
    m.add_function(wrap_pyfunction!(poincare_coadd, m)?)?;
    m.add_function(wrap_pyfunction!(poincare_midpoint, m)?)?;
    m.add_function(wrap_pyfunction!(poincare_scale, m)?)?;
    m.add_function(wrap_pyfunction!(poincare_gyration, m)?)?;
    m.add_function(wrap_pyfunction!(klein_add, m)?)?;
    m.add_function(wrap_pyfunction!(klein_sub, m)?)?;
    m.add_function(wrap_pyfunction!(klein_midpoint, m)?)?;
    m.add_function(wrap_pyfunction!(klein_scale, m)?)?;
    m.add_function(wrap_pyfunction!(klein_gyration, m)?)?;
    Ok(())
}
