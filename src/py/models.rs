//! Wrappers for the model layer: distances, exp/log maps, transport,
//! geodesics, projections, the Möbius matrix-vector product, conversions.

use pyo3::prelude::*;

use super::coerce::{binary, coerce, coerce_opt, ternary, to_py};
use crate::batch::{Data, Output};
use crate::error::Result;
use crate::models::ball::Curvature;
use crate::models::convert::convert_arrays;
use crate::models::Model;
use crate::models::{halfspace, hyperboloid, klein, poincare};

type WithBase = for<'a> fn(Curvature, Data<'a>, Option<Data<'a>>) -> Result<Output>;

fn with_base(
    py: Python<'_>,
    name: &str,
    v: &Bound<'_, PyAny>,
    base: Option<&Bound<'_, PyAny>>,
    curvature: f64,
    f: WithBase,
) -> PyResult<Py<PyAny>> {
    let c = Curvature::new(curvature)?;
    let va = coerce(py, name, v)?;
    let ba = coerce_opt(py, "base", base)?;
    let vd = va.data();
    let bd = ba.as_ref().map(|b| b.data());
    let out = py.detach(move || f(c, vd, bd))?;
    to_py(py, out)
}

macro_rules! distance_fn {
    ($pyname:ident, $core:path) => {
        #[pyfunction]
        #[pyo3(signature = (x, y, curvature = -1.0))]
        fn $pyname(py: Python<'_>, x: &Bound<'_, PyAny>, y: &Bound<'_, PyAny>, curvature: f64) -> PyResult<Py<PyAny>> {
            binary(py, ["x", "y"], x, y, curvature, $core)
        }
    };
}

macro_rules! base_fn {
    ($pyname:ident, $core:path, $arg:ident) => {
        #[pyfunction]
        #[pyo3(signature = ($arg, base = None, curvature = -1.0))]
        fn $pyname(
            py: Python<'_>,
            $arg: &Bound<'_, PyAny>,
            base: Option<&Bound<'_, PyAny>>,
            curvature: f64,
        ) -> PyResult<Py<PyAny>> {
            with_base(py, stringify!($arg), $arg, base, curvature, $core)
        }
    };
}

macro_rules! transport_fn {
    ($pyname:ident, $core:path) => {
        #[pyfunction]
        #[pyo3(signature = (v, start, end, curvature = -1.0))]
        fn $pyname(
            py: Python<'_>,
            v: &Bound<'_, PyAny>,
            start: &Bound<'_, PyAny>,
            end: &Bound<'_, PyAny>,
            curvature: f64,
        ) -> PyResult<Py<PyAny>> {
            ternary(py, ["v", "start", "end"], v, start, end, curvature, $core)
        }
    };
}

macro_rules! geodesic_fn {
    ($pyname:ident, $core:path) => {
        #[pyfunction]
        #[pyo3(signature = (x, y, t, curvature = -1.0))]
        fn $pyname(
            py: Python<'_>,
            x: &Bound<'_, PyAny>,
            y: &Bound<'_, PyAny>,
            t: &Bound<'_, PyAny>,
            curvature: f64,
        ) -> PyResult<Py<PyAny>> {
            ternary(py, ["x", "y", "t"], x, y, t, curvature, $core)
        }
    };
}

distance_fn!(poincare_distance, poincare::distance_arrays);
distance_fn!(klein_distance, klein::distance_arrays);
distance_fn!(hyperboloid_distance, hyperboloid::distance_arrays);
distance_fn!(halfspace_distance, halfspace::distance_arrays);
base_fn!(poincare_exp_map, poincare::exp_map_arrays, v);
base_fn!(klein_exp_map, klein::exp_map_arrays, v);
base_fn!(hyperboloid_exp_map, hyperboloid::exp_map_arrays, v);
base_fn!(poincare_log_map, poincare::log_map_arrays, y);
base_fn!(klein_log_map, klein::log_map_arrays, y);
base_fn!(hyperboloid_log_map, hyperboloid::log_map_arrays, y);
transport_fn!(poincare_transport, poincare::transport_arrays);
transport_fn!(klein_transport, klein::transport_arrays);
transport_fn!(hyperboloid_transport, hyperboloid::transport_arrays);
geodesic_fn!(poincare_geodesic, poincare::geodesic_arrays);
geodesic_fn!(klein_geodesic, klein::geodesic_arrays);
geodesic_fn!(hyperboloid_geodesic, hyperboloid::geodesic_arrays);

#[pyfunction]
#[pyo3(signature = (x, margin = 1e-12, curvature = -1.0))]
fn poincare_project(py: Python<'_>, x: &Bound<'_, PyAny>, margin: f64, curvature: f64) -> PyResult<Py<PyAny>> {
    let c = Curvature::new(curvature)?;
    let xa = coerce(py, "x", x)?;
    let xd = xa.data();
    let out = py.detach(move || poincare::project_arrays(c, xd, margin))?;
    to_py(py, out)
}

#[pyfunction]
#[pyo3(signature = (x, margin = 1e-12, curvature = -1.0))]
fn klein_project(py: Python<'_>, x: &Bound<'_, PyAny>, margin: f64, curvature: f64) -> PyResult<Py<PyAny>> {
    let c = Curvature::new(curvature)?;
    let xa = coerce(py, "x", x)?;
    let xd = xa.data();
    let out = py.detach(move || klein::project_arrays(c, xd, margin))?;
    to_py(py, out)
}

#[pyfunction]
#[pyo3(signature = (x, curvature = -1.0))]
fn hyperboloid_project(py: Python<'_>, x: &Bound<'_, PyAny>, curvature: f64) -> PyResult<Py<PyAny>> {
    let c = Curvature::new(curvature)?;
    let xa = coerce(py, "x", x)?;
    let xd = xa.data();
    let out = py.detach(move || hyperboloid::project_arrays(c, xd))?;
    to_py(py, out)
}

#[pyfunction]
#[pyo3(signature = (u, v))]
fn hyperboloid_inner(py: Python<'_>, u: &Bound<'_, PyAny>, v: &Bound<'_, PyAny>) -> PyResult<Py<PyAny>> {
    let (ua, va) = (coerce(py, "u", u)?, coerce(py, "v", v)?);
    let (ud, vd) = (ua.data(), va.data());
    let out = py.detach(move || hyperboloid::inner_arrays(ud, vd))?;
    to_py(py, out)
}

#[pyfunction]
#[pyo3(signature = (m, x, curvature = -1.0))]
fn poincare_matvec(py: Python<'_>, m: &Bound<'_, PyAny>, x: &Bound<'_, PyAny>, curvature: f64) -> PyResult<Py<PyAny>> {
    let c = Curvature::new(curvature)?;
    let ma = coerce(py, "m", m)?;
    let xa = coerce(py, "x", x)?;
    let (md, xd) = (ma.data(), xa.data());
    let out = py.detach(move || poincare::matvec_arrays(c, md, xd))?;
    to_py(py, out)
}

#[pyfunction]
#[pyo3(signature = (x, src, dst, curvature = -1.0))]
fn convert(py: Python<'_>, x: &Bound<'_, PyAny>, src: &str, dst: &str, curvature: f64) -> PyResult<Py<PyAny>> {
    let c = Curvature::new(curvature)?;
    let s = Model::parse(src, "src")?;
    let d = Model::parse(dst, "dst")?;
    let xa = coerce(py, "x", x)?;
    let xd = xa.data();
    let out = py.detach(move || convert_arrays(c, xd, s, d))?;
    to_py(py, out)
}

pub fn register(m: &Bound<'_, PyModule>) -> PyResult<()> {
    m.add_function(wrap_pyfunction!(poincare_distance, m)?)?;
    m.add_function(wrap_pyfunction!(klein_distance, m)?)?;
    m.add_function(wrap_pyfunction!(hyperboloid_distance, m)?)?;
    m.add_function(wrap_pyfunction!(halfspace_distance, m)?)?;
    m.add_function(wrap_pyfunction!(poincare_exp_map, m)?)?;
    m.add_function(wrap_pyfunction!(klein_exp_map, m)?)?;
    m.add_function(wrap_pyfunction!(hyperboloid_exp_map, m)?)?;
    m.add_function(wrap_pyfunction!(poincare_log_map, m)?)?;
    m.add_function(wrap_pyfunction!(klein_log_map, m)?)?;
    m.add_function(wrap_pyfunction!(hyperboloid_log_map, m)?)?;
    m.add_function(wrap_pyfunction!(poincare_transport, m)?)?;
    m.add_function(wrap_pyfunction!(klein_transport, m)?)?;
    m.add_function(wrap_pyfunction!(hyperboloid_transport, m)?)?;
    m.add_function(wrap_pyfunction!(poincare_geodesic, m)?)?;
    m.add_function(wrap_pyfunction!(klein_geodesic, m)?)?;
    m.add_function(wrap_pyfunction!(hyperboloid_geodesic, m)?)?;
    m.add_function(wrap_pyfunction!(poincare_project, m)?)?;
    m.add_function(wrap_pyfunction!(klein_project, m)?)?;
    m.add_function(wrap_pyfunction!(hyperboloid_project, m)?)?;
    m.add_function(wrap_pyfunction!(hyperboloid_inner, m)?)?;
    m.add_function(wrap_pyfunction!(poincare_matvec, m)?)?;
    m.add_function(wrap_pyfunction!(convert, m)?)?;
    Ok(())
}
