//! Wrappers for the model layer: distances, exp/log maps, transport,
//! geodesics, projections, the Möbius matrix-vector product, conversions.

use pyo3::prelude::*;

use super::algebra::with_rim;
use super::coerce::{binary, coerce, coerce_opt, ternary, to_py};
use crate::batch::{Data, Output};
use crate::error::Result;
use crate::models::ball::{self, Curvature, Rim};
use crate::models::convert::convert_arrays;
use crate::models::gyro::{self, GyroBall};
use crate::models::hyperboloid;
use crate::models::klein::Einstein;
use crate::models::poincare::{self, Mobius};
use crate::models::Model;
use crate::pairwise;

type WithBase = for<'a> fn(Curvature, Data<'a>, Option<Data<'a>>) -> Result<Output>;
type WithBaseRim = for<'a, 'r> fn(Curvature, Data<'a>, Option<Data<'a>>, &'r Rim) -> Result<Output>;
type GeodesicRim = for<'a, 'r> fn(Curvature, Data<'a>, Data<'a>, Data<'a>, &'r Rim) -> Result<Output>;

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

#[pyfunction]
#[pyo3(signature = (v, base = None, curvature = -1.0, on_rim = "raise"))]
fn poincare_exp_map(
    py: Python<'_>,
    v: &Bound<'_, PyAny>,
    base: Option<&Bound<'_, PyAny>>,
    curvature: f64,
    on_rim: &str,
) -> PyResult<Py<PyAny>> {
    exp_map_rim(py, "poincare.exp_map", Mobius::NAME, v, base, curvature, on_rim, gyro::exp_map_arrays::<Mobius>)
}

#[pyfunction]
#[pyo3(signature = (v, base = None, curvature = -1.0, on_rim = "raise"))]
fn klein_exp_map(
    py: Python<'_>,
    v: &Bound<'_, PyAny>,
    base: Option<&Bound<'_, PyAny>>,
    curvature: f64,
    on_rim: &str,
) -> PyResult<Py<PyAny>> {
    exp_map_rim(py, "klein.exp_map", Einstein::NAME, v, base, curvature, on_rim, gyro::exp_map_arrays::<Einstein>)
}

#[allow(clippy::too_many_arguments)]
fn exp_map_rim(
    py: Python<'_>,
    func: &str,
    model: &str,
    v: &Bound<'_, PyAny>,
    base: Option<&Bound<'_, PyAny>>,
    curvature: f64,
    on_rim: &str,
    f: WithBaseRim,
) -> PyResult<Py<PyAny>> {
    let c = Curvature::new(curvature)?;
    let va = coerce(py, "v", v)?;
    let ba = coerce_opt(py, "base", base)?;
    let vd = va.data();
    let bd = ba.as_ref().map(|b| b.data());
    with_rim(py, func, model, on_rim, move |rim| f(c, vd, bd, rim))
}

#[allow(clippy::too_many_arguments)]
fn geodesic_rim(
    py: Python<'_>,
    func: &str,
    model: &str,
    x: &Bound<'_, PyAny>,
    y: &Bound<'_, PyAny>,
    t: &Bound<'_, PyAny>,
    curvature: f64,
    on_rim: &str,
    f: GeodesicRim,
) -> PyResult<Py<PyAny>> {
    let c = Curvature::new(curvature)?;
    let (xa, ya, ta) = (coerce(py, "x", x)?, coerce(py, "y", y)?, coerce(py, "t", t)?);
    let (xd, yd, td) = (xa.data(), ya.data(), ta.data());
    with_rim(py, func, model, on_rim, move |rim| f(c, xd, yd, td, rim))
}

macro_rules! geodesic_rim_fn {
    ($pyname:ident, $func:literal, $m:ty) => {
        #[pyfunction]
        #[pyo3(signature = (x, y, t, curvature = -1.0, on_rim = "raise"))]
        fn $pyname(
            py: Python<'_>,
            x: &Bound<'_, PyAny>,
            y: &Bound<'_, PyAny>,
            t: &Bound<'_, PyAny>,
            curvature: f64,
            on_rim: &str,
        ) -> PyResult<Py<PyAny>> {
            geodesic_rim(py, $func, <$m>::NAME, x, y, t, curvature, on_rim, gyro::geodesic_arrays::<$m>)
        }
    };
}

geodesic_rim_fn!(poincare_geodesic, "poincare.geodesic", Mobius);
geodesic_rim_fn!(klein_geodesic, "klein.geodesic", Einstein);

macro_rules! distance_fn {
    ($pyname:ident, $core:expr) => {
        #[pyfunction]
        #[pyo3(signature = (x, y, curvature = -1.0))]
        fn $pyname(py: Python<'_>, x: &Bound<'_, PyAny>, y: &Bound<'_, PyAny>, curvature: f64) -> PyResult<Py<PyAny>> {
            binary(py, ["x", "y"], x, y, curvature, |c, x, y| pairwise::distance_arrays($core, c, x, y))
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

distance_fn!(poincare_distance, Model::Poincare);
distance_fn!(klein_distance, Model::Klein);
distance_fn!(hyperboloid_distance, Model::Hyperboloid);
distance_fn!(halfspace_distance, Model::HalfSpace);
base_fn!(hyperboloid_exp_map, hyperboloid::exp_map_arrays, v);
base_fn!(poincare_log_map, gyro::log_map_arrays::<Mobius>, y);
base_fn!(klein_log_map, gyro::log_map_arrays::<Einstein>, y);
base_fn!(hyperboloid_log_map, hyperboloid::log_map_arrays, y);
transport_fn!(poincare_transport, gyro::transport_arrays::<Mobius>);
transport_fn!(klein_transport, gyro::transport_arrays::<Einstein>);
transport_fn!(hyperboloid_transport, hyperboloid::transport_arrays);
geodesic_fn!(hyperboloid_geodesic, hyperboloid::geodesic_arrays);

fn ball_project(py: Python<'_>, x: &Bound<'_, PyAny>, margin: f64, curvature: f64) -> PyResult<Py<PyAny>> {
    let c = Curvature::new(curvature)?;
    let xa = coerce(py, "x", x)?;
    let xd = xa.data();
    let out = py.detach(move || ball::project_arrays(c, xd, margin))?;
    to_py(py, out)
}

#[pyfunction]
#[pyo3(signature = (x, margin = 1e-12, curvature = -1.0))]
fn poincare_project(py: Python<'_>, x: &Bound<'_, PyAny>, margin: f64, curvature: f64) -> PyResult<Py<PyAny>> {
    ball_project(py, x, margin, curvature)
}

#[pyfunction]
#[pyo3(signature = (x, margin = 1e-12, curvature = -1.0))]
fn klein_project(py: Python<'_>, x: &Bound<'_, PyAny>, margin: f64, curvature: f64) -> PyResult<Py<PyAny>> {
    ball_project(py, x, margin, curvature)
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
#[pyo3(signature = (m, x, curvature = -1.0, on_rim = "raise"))]
fn poincare_matvec(
    py: Python<'_>,
    m: &Bound<'_, PyAny>,
    x: &Bound<'_, PyAny>,
    curvature: f64,
    on_rim: &str,
) -> PyResult<Py<PyAny>> {
    let c = Curvature::new(curvature)?;
    let ma = coerce(py, "m", m)?;
    let xa = coerce(py, "x", x)?;
    let (md, xd) = (ma.data(), xa.data());
    with_rim(py, "poincare.matvec", Mobius::NAME, on_rim, move |rim| poincare::matvec_arrays(c, md, xd, rim))
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
