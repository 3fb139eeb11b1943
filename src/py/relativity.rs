//! Wrappers for relativistic velocities (`gyrokit.relativity`): coerce the
//! arrays, validate `c` (and `curvature`), release the GIL around the core
//! call. No numerics here.

use pyo3::prelude::*;

use super::coerce::{coerce, to_py};
use crate::batch::{Data, Output};
use crate::error::Result;
use crate::models::ball::Curvature;
use crate::relativity::{self as rel, Light};

type Unary = for<'a> fn(Light, Data<'a>) -> Result<Output>;
type Binary = for<'a> fn(Light, Data<'a>, Data<'a>) -> Result<Output>;
type Klein = for<'a> fn(Light, Curvature, Data<'a>) -> Result<Output>;

fn unary(py: Python<'_>, name: &str, x: &Bound<'_, PyAny>, c: f64, f: Unary) -> PyResult<Py<PyAny>> {
    let l = Light::new(c)?;
    let xa = coerce(py, name, x)?;
    let xd = xa.data();
    let out = py.detach(move || f(l, xd))?;
    to_py(py, out)
}

fn binary(
    py: Python<'_>,
    names: [&str; 2],
    x: &Bound<'_, PyAny>,
    y: &Bound<'_, PyAny>,
    c: f64,
    f: Binary,
) -> PyResult<Py<PyAny>> {
    let l = Light::new(c)?;
    let (xa, ya) = (coerce(py, names[0], x)?, coerce(py, names[1], y)?);
    let (xd, yd) = (xa.data(), ya.data());
    let out = py.detach(move || f(l, xd, yd))?;
    to_py(py, out)
}

fn klein(py: Python<'_>, name: &str, x: &Bound<'_, PyAny>, c: f64, curvature: f64, f: Klein) -> PyResult<Py<PyAny>> {
    let l = Light::new(c)?;
    let ball = Curvature::new(curvature)?;
    let xa = coerce(py, name, x)?;
    let xd = xa.data();
    let out = py.detach(move || f(l, ball, xd))?;
    to_py(py, out)
}

macro_rules! unary_fn {
    ($pyname:ident, $core:path, $arg:ident) => {
        #[pyfunction]
        #[pyo3(signature = ($arg, c = 299_792_458.0))]
        fn $pyname(py: Python<'_>, $arg: &Bound<'_, PyAny>, c: f64) -> PyResult<Py<PyAny>> {
            unary(py, stringify!($arg), $arg, c, $core)
        }
    };
}

macro_rules! binary_fn {
    ($pyname:ident, $core:path, $a:ident, $b:ident) => {
        #[pyfunction]
        #[pyo3(signature = ($a, $b, c = 299_792_458.0))]
        fn $pyname(py: Python<'_>, $a: &Bound<'_, PyAny>, $b: &Bound<'_, PyAny>, c: f64) -> PyResult<Py<PyAny>> {
            binary(py, [stringify!($a), stringify!($b)], $a, $b, c, $core)
        }
    };
}

macro_rules! klein_fn {
    ($pyname:ident, $core:path, $arg:ident) => {
        #[pyfunction]
        #[pyo3(signature = ($arg, c = 299_792_458.0, curvature = -1.0))]
        fn $pyname(py: Python<'_>, $arg: &Bound<'_, PyAny>, c: f64, curvature: f64) -> PyResult<Py<PyAny>> {
            klein(py, stringify!($arg), $arg, c, curvature, $core)
        }
    };
}

unary_fn!(relativity_lorentz_factor, rel::lorentz_factor_arrays, v);
unary_fn!(relativity_gamma_minus_one, rel::gamma_minus_one_arrays, v);
unary_fn!(relativity_boost, rel::boost_arrays, v);
unary_fn!(relativity_rapidity, rel::rapidity_arrays, v);
unary_fn!(relativity_velocity_from_rapidity, rel::velocity_from_rapidity_arrays, w);
binary_fn!(relativity_compose, rel::compose_arrays, u, v);
binary_fn!(relativity_thomas_rotation, rel::thomas_rotation_arrays, u, v);
binary_fn!(relativity_wigner_angle, rel::wigner_angle_arrays, u, v);
binary_fn!(relativity_wigner_axis, rel::wigner_axis_arrays, u, v);
binary_fn!(relativity_thomas_precession, rel::thomas_precession_arrays, v, a);
klein_fn!(relativity_to_klein, rel::to_klein_arrays, v);
klein_fn!(relativity_from_klein, rel::from_klein_arrays, k);

pub fn register(m: &Bound<'_, PyModule>) -> PyResult<()> {
    m.add_function(wrap_pyfunction!(relativity_lorentz_factor, m)?)?;
    m.add_function(wrap_pyfunction!(relativity_gamma_minus_one, m)?)?;
    m.add_function(wrap_pyfunction!(relativity_boost, m)?)?;
    m.add_function(wrap_pyfunction!(relativity_rapidity, m)?)?;
    m.add_function(wrap_pyfunction!(relativity_velocity_from_rapidity, m)?)?;
    m.add_function(wrap_pyfunction!(relativity_compose, m)?)?;
    m.add_function(wrap_pyfunction!(relativity_thomas_rotation, m)?)?;
    m.add_function(wrap_pyfunction!(relativity_wigner_angle, m)?)?;
    m.add_function(wrap_pyfunction!(relativity_wigner_axis, m)?)?;
    m.add_function(wrap_pyfunction!(relativity_thomas_precession, m)?)?;
    m.add_function(wrap_pyfunction!(relativity_to_klein, m)?)?;
    m.add_function(wrap_pyfunction!(relativity_from_klein, m)?)?;
    Ok(())
}
