//! Wrappers for gyrotrigonometry: gyroangles of the two ball models and
//! triangles of every model.

use pyo3::prelude::*;

use super::coerce::{coerce, to_py};
use crate::models::ball::Curvature;
use crate::models::Model;
use crate::trig::{self, Space};

fn angle(
    py: Python<'_>,
    space: Space,
    a: &Bound<'_, PyAny>,
    b: &Bound<'_, PyAny>,
    c: &Bound<'_, PyAny>,
    curvature: f64,
) -> PyResult<Py<PyAny>> {
    let k = Curvature::new(curvature)?;
    let (aa, ba, ca) = (coerce(py, "a", a)?, coerce(py, "b", b)?, coerce(py, "c", c)?);
    let (ad, bd, cd) = (aa.data(), ba.data(), ca.data());
    let out = py.detach(move || trig::angle_arrays(space, k, ad, bd, cd))?;
    to_py(py, out)
}

#[pyfunction]
#[pyo3(signature = (a, b, c, curvature = -1.0))]
fn poincare_angle(
    py: Python<'_>,
    a: &Bound<'_, PyAny>,
    b: &Bound<'_, PyAny>,
    c: &Bound<'_, PyAny>,
    curvature: f64,
) -> PyResult<Py<PyAny>> {
    angle(py, Space::Mobius, a, b, c, curvature)
}

#[pyfunction]
#[pyo3(signature = (a, b, c, curvature = -1.0))]
fn klein_angle(
    py: Python<'_>,
    a: &Bound<'_, PyAny>,
    b: &Bound<'_, PyAny>,
    c: &Bound<'_, PyAny>,
    curvature: f64,
) -> PyResult<Py<PyAny>> {
    angle(py, Space::Einstein, a, b, c, curvature)
}

/// `(..., 8)`: sides, angles, defect, area per triangle.
#[pyfunction]
#[pyo3(signature = (a, b, c, model, curvature = -1.0))]
fn triangle(
    py: Python<'_>,
    a: &Bound<'_, PyAny>,
    b: &Bound<'_, PyAny>,
    c: &Bound<'_, PyAny>,
    model: &str,
    curvature: f64,
) -> PyResult<Py<PyAny>> {
    let m = Model::parse(model, "model")?;
    let k = Curvature::new(curvature)?;
    let (aa, ba, ca) = (coerce(py, "a", a)?, coerce(py, "b", b)?, coerce(py, "c", c)?);
    let (ad, bd, cd) = (aa.data(), ba.data(), ca.data());
    let out = py.detach(move || trig::triangle_arrays(m, k, ad, bd, cd))?;
    to_py(py, out)
}

pub fn register(m: &Bound<'_, PyModule>) -> PyResult<()> {
    m.add_function(wrap_pyfunction!(poincare_angle, m)?)?;
    m.add_function(wrap_pyfunction!(klein_angle, m)?)?;
    m.add_function(wrap_pyfunction!(triangle, m)?)?;
    Ok(())
}
