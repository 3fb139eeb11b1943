//! Wrappers for the gyrovector algebra of the Poincaré and Klein balls.

use pyo3::prelude::*;

use super::coerce::{binary, ternary};
use crate::models::{klein, poincare};

macro_rules! binary_fn {
    ($pyname:ident, $core:path, $a:literal, $b:literal) => {
        #[pyfunction]
        #[pyo3(signature = (x, y, curvature = -1.0))]
        fn $pyname(py: Python<'_>, x: &Bound<'_, PyAny>, y: &Bound<'_, PyAny>, curvature: f64) -> PyResult<Py<PyAny>> {
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

macro_rules! gyration_fn {
    ($pyname:ident, $core:path) => {
        #[pyfunction]
        #[pyo3(signature = (a, b, v, curvature = -1.0))]
        fn $pyname(
            py: Python<'_>,
            a: &Bound<'_, PyAny>,
            b: &Bound<'_, PyAny>,
            v: &Bound<'_, PyAny>,
            curvature: f64,
        ) -> PyResult<Py<PyAny>> {
            ternary(py, ["a", "b", "v"], a, b, v, curvature, $core)
        }
    };
}

gyration_fn!(poincare_gyration, poincare::gyration_arrays);
gyration_fn!(klein_gyration, klein::gyration_arrays);

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
