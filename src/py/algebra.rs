//! Wrappers for the gyrovector algebra of the Poincaré and Klein balls, and
//! the rim policy (`on_rim`) shared with the model-layer wrappers.

use pyo3::exceptions::PyRuntimeWarning;
use pyo3::prelude::*;

use super::coerce::{coerce, to_py};
use crate::batch::{Data, Output};
use crate::error::{ball_range_text, Result};
use crate::models::ball::{Curvature, OnRim, Rim};
use crate::models::gyro::{self, GyroBall};
use crate::models::klein::Einstein;
use crate::models::poincare::{self, Mobius};

pyo3::create_exception!(
    gyrokit,
    RimClipWarning,
    PyRuntimeWarning,
    "Results beyond what the output dtype holds inside a ball model were clipped to the last radius \
     (on_rim='clip'): their distances from the origin are wrong."
);

/// Runs a core call under the `on_rim` policy with the GIL released, and
/// warns (`RimClipWarning`, pointing at the caller of the public function)
/// when rows were clipped. `func` names the public function, `model` the
/// ball model in the warning.
pub(super) fn with_rim<'py, F>(py: Python<'py>, func: &str, model: &str, on_rim: &str, f: F) -> PyResult<Py<PyAny>>
where
    F: for<'r> FnOnce(&'r Rim) -> Result<Output> + Send,
{
    let rim = Rim::new(OnRim::parse(on_rim)?);
    let out = py.detach(|| f(&rim))?;
    let n = rim.clipped();
    if n > 0 {
        let f32 = matches!(out, Output::F32(_));
        let total: usize = out.shape()[..out.shape().len().saturating_sub(1)].iter().product();
        let msg = format!(
            "{func}: {n} of {total} results clipped to the last radius inside the ball (on_rim='clip'); \
             their distances from the origin are wrong: for each, {}",
            ball_range_text(model, f32)
        );
        let cat = py.get_type::<RimClipWarning>();
        PyErr::warn(py, cat.as_any(), &std::ffi::CString::new(msg).unwrap_or_default(), 2)?;
    }
    to_py(py, out)
}

type Binary = for<'a, 'r> fn(Curvature, Data<'a>, Data<'a>, &'r Rim) -> Result<Output>;

#[allow(clippy::too_many_arguments)]
fn binary_rim(
    py: Python<'_>,
    func: &str,
    model: &str,
    names: [&str; 2],
    x: &Bound<'_, PyAny>,
    y: &Bound<'_, PyAny>,
    curvature: f64,
    on_rim: &str,
    f: Binary,
) -> PyResult<Py<PyAny>> {
    let c = Curvature::new(curvature)?;
    let (xa, ya) = (coerce(py, names[0], x)?, coerce(py, names[1], y)?);
    let (xd, yd) = (xa.data(), ya.data());
    with_rim(py, func, model, on_rim, move |rim| f(c, xd, yd, rim))
}

macro_rules! binary_fn {
    ($pyname:ident, $func:literal, $m:ty, $core:path, $a:ident, $b:ident) => {
        #[pyfunction]
        #[pyo3(signature = ($a, $b, curvature = -1.0, on_rim = "raise"))]
        fn $pyname(
            py: Python<'_>,
            $a: &Bound<'_, PyAny>,
            $b: &Bound<'_, PyAny>,
            curvature: f64,
            on_rim: &str,
        ) -> PyResult<Py<PyAny>> {
            binary_rim(py, $func, <$m>::NAME, [stringify!($a), stringify!($b)], $a, $b, curvature, on_rim, $core)
        }
    };
}

binary_fn!(poincare_add, "poincare.add", Mobius, gyro::add_arrays::<Mobius>, x, y);
binary_fn!(poincare_sub, "poincare.sub", Mobius, gyro::sub_arrays::<Mobius>, x, y);
binary_fn!(poincare_coadd, "poincare.coadd", Mobius, poincare::coadd_arrays, x, y);
binary_fn!(poincare_midpoint, "poincare.midpoint", Mobius, gyro::midpoint_arrays::<Mobius>, x, y);
binary_fn!(poincare_scale, "poincare.scale", Mobius, gyro::scale_arrays::<Mobius>, r, x);
binary_fn!(klein_add, "klein.add", Einstein, gyro::add_arrays::<Einstein>, x, y);
binary_fn!(klein_sub, "klein.sub", Einstein, gyro::sub_arrays::<Einstein>, x, y);
binary_fn!(klein_midpoint, "klein.midpoint", Einstein, gyro::midpoint_arrays::<Einstein>, x, y);
binary_fn!(klein_scale, "klein.scale", Einstein, gyro::scale_arrays::<Einstein>, r, x);

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
            super::coerce::ternary(py, ["a", "b", "v"], a, b, v, curvature, $core)
        }
    };
}

gyration_fn!(poincare_gyration, gyro::gyration_arrays::<Mobius>);
gyration_fn!(klein_gyration, gyro::gyration_arrays::<Einstein>);

pub fn register(m: &Bound<'_, PyModule>) -> PyResult<()> {
    m.add("RimClipWarning", m.py().get_type::<RimClipWarning>())?;
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
