//! pyo3 wrapper of the metric-tree index (to be written).
use pyo3::prelude::*;

pub fn register(_m: &Bound<'_, PyModule>) -> PyResult<()> {
    Ok(())
}
