//! Array coercion, written once: anything `np.asarray` turns into real
//! numbers becomes a borrowed float64 or float32 view; everything else is a
//! `TypeError` naming the argument.

use numpy::{PyArrayDyn, PyArrayMethods, PyReadonlyArrayDyn};
use pyo3::exceptions::PyTypeError;
use pyo3::prelude::*;
use pyo3::sync::PyOnceLock;
use pyo3::types::{PyFloat, PyInt};

use crate::batch::Data;
use crate::error::Error;

/// An input held for the duration of a call.
pub enum Held<'py> {
    F64(PyReadonlyArrayDyn<'py, f64>),
    F32(PyReadonlyArrayDyn<'py, f32>),
}

/// A coerced argument: its data, and whether it came from a bare Python
/// number (which does not take part in choosing the result dtype, like
/// NumPy's weak scalars).
pub struct Arg<'py> {
    pub held: Held<'py>,
    pub weak: bool,
}

impl<'py> Arg<'py> {
    pub fn data(&self) -> Data<'_> {
        match &self.held {
            Held::F64(a) if self.weak => Data::Weak(a.as_array()),
            Held::F64(a) => Data::F64(a.as_array()),
            Held::F32(a) => Data::F32(a.as_array()),
        }
    }
}

static ASARRAY: PyOnceLock<Py<PyAny>> = PyOnceLock::new();

fn asarray<'py>(py: Python<'py>) -> PyResult<&'py Bound<'py, PyAny>> {
    ASARRAY.import(py, "numpy", "asarray")
}

/// Coerces `ob` (argument `name`) to a float64 or float32 array.
pub fn coerce<'py>(py: Python<'py>, name: &str, ob: &Bound<'py, PyAny>) -> PyResult<Arg<'py>> {
    if let Ok(a) = ob.cast::<PyArrayDyn<f64>>() {
        return Ok(Arg { held: Held::F64(a.try_readonly()?), weak: false });
    }
    if let Ok(a) = ob.cast::<PyArrayDyn<f32>>() {
        return Ok(Arg { held: Held::F32(a.try_readonly()?), weak: false });
    }
    // Only exact Python floats and ints are weak: NumPy scalars such as
    // np.float64(2.0) (a float subclass) keep their dtype, as in NEP 50.
    let weak = ob.is_exact_instance_of::<PyFloat>() || ob.is_exact_instance_of::<PyInt>();
    let arr = asarray(py)?
        .call1((ob,))
        .map_err(|e| PyTypeError::new_err(format!("{name} must be an array of real numbers: {e}")))?;
    let dtype = arr.getattr("dtype")?;
    let kind: String = dtype.getattr("kind")?.extract()?;
    let itemsize: usize = dtype.getattr("itemsize")?.extract()?;
    let native: bool = dtype.getattr("isnative")?.extract()?;
    let target = match (kind.as_str(), itemsize) {
        ("f", 8) if native => None,
        ("f", 4) if native => {
            let a = arr.cast::<PyArrayDyn<f32>>()?;
            return Ok(Arg { held: Held::F32(a.try_readonly()?), weak });
        }
        ("f", 4) => {
            // Non-native byte order: swap into a native float32 copy.
            let arr = arr.call_method1("astype", ("=f4",))?;
            let a = arr.cast::<PyArrayDyn<f32>>()?;
            return Ok(Arg { held: Held::F32(a.try_readonly()?), weak });
        }
        ("f", _) | ("i", _) | ("u", _) => Some("float64"),
        _ => {
            let s: String = dtype.str()?.extract()?;
            return Err(Error::Type(format!(
                "{name} has dtype {s}; expected real numbers (float64, float32 or integers)"
            ))
            .into());
        }
    };
    let arr = match target {
        Some(t) => arr.call_method1("astype", (t,))?,
        None => arr,
    };
    let a = arr.cast::<PyArrayDyn<f64>>()?.clone();
    Ok(Arg { held: Held::F64(a.try_readonly()?), weak })
}

/// [`coerce`] for an optional argument: `None` (absent or Python `None`)
/// stays `None`.
pub fn coerce_opt<'py>(py: Python<'py>, name: &str, ob: Option<&Bound<'py, PyAny>>) -> PyResult<Option<Arg<'py>>> {
    match ob {
        Some(o) if !o.is_none() => Ok(Some(coerce(py, name, o)?)),
        _ => Ok(None),
    }
}

/// Hands a core result to Python: an ndarray without copying, or a NumPy
/// scalar for 0-d results (like NumPy's ufuncs).
pub fn to_py(py: Python<'_>, out: crate::batch::Output) -> PyResult<Py<PyAny>> {
    use numpy::IntoPyArray;
    let arr: Bound<'_, PyAny> = match out {
        crate::batch::Output::F64(a) => a.into_pyarray(py).into_any(),
        crate::batch::Output::F32(a) => a.into_pyarray(py).into_any(),
    };
    let nd: usize = arr.getattr("ndim")?.extract()?;
    if nd == 0 {
        return Ok(arr.get_item(())?.unbind());
    }
    Ok(arr.unbind())
}

/// The element-wise kernels of one broadcast call: curvature in, operands
/// coerced (named for errors), the core called with the GIL released.
pub type Binary =
    for<'a> fn(crate::models::ball::Curvature, Data<'a>, Data<'a>) -> crate::error::Result<crate::batch::Output>;
pub type Ternary = for<'a> fn(
    crate::models::ball::Curvature,
    Data<'a>,
    Data<'a>,
    Data<'a>,
) -> crate::error::Result<crate::batch::Output>;

/// Calls a two-operand kernel (`names` are the Python argument names).
pub fn binary(
    py: Python<'_>,
    names: [&str; 2],
    x: &Bound<'_, PyAny>,
    y: &Bound<'_, PyAny>,
    curvature: f64,
    f: Binary,
) -> PyResult<Py<PyAny>> {
    let c = crate::models::ball::Curvature::new(curvature)?;
    let (xa, ya) = (coerce(py, names[0], x)?, coerce(py, names[1], y)?);
    let (xd, yd) = (xa.data(), ya.data());
    let out = py.detach(move || f(c, xd, yd))?;
    to_py(py, out)
}

/// Calls a three-operand kernel (`names` are the Python argument names).
pub fn ternary(
    py: Python<'_>,
    names: [&str; 3],
    a: &Bound<'_, PyAny>,
    b: &Bound<'_, PyAny>,
    v: &Bound<'_, PyAny>,
    curvature: f64,
    f: Ternary,
) -> PyResult<Py<PyAny>> {
    let c = crate::models::ball::Curvature::new(curvature)?;
    let (aa, ba, va) = (coerce(py, names[0], a)?, coerce(py, names[1], b)?, coerce(py, names[2], v)?);
    let (ad, bd, vd) = (aa.data(), ba.data(), va.data());
    let out = py.detach(move || f(c, ad, bd, vd))?;
    to_py(py, out)
}
