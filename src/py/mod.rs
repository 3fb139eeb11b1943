//! The pyo3 layer: converts arguments, releases the GIL around the core
//! kernels, and maps core errors to Python exceptions. No numerics here.

use pyo3::exceptions::{PyTypeError, PyValueError};
use pyo3::prelude::*;

use crate::error::Error;

mod algebra;
mod centroids;
pub(crate) mod coerce;
mod embed_graph;
mod embed_tree;
mod index;
mod kmeans;
mod metrics;
mod models;
mod neighbors;
mod partial;
mod random;
mod relativity;
mod trig;

impl From<Error> for PyErr {
    fn from(e: Error) -> PyErr {
        match e {
            Error::Value(m) => PyValueError::new_err(m),
            Error::Type(m) => PyTypeError::new_err(m),
        }
    }
}

#[pymodule]
fn _native(m: &Bound<'_, PyModule>) -> PyResult<()> {
    algebra::register(m)?;
    centroids::register(m)?;
    embed_tree::register(m)?;
    embed_graph::register(m)?;
    models::register(m)?;
    index::register(m)?;
    kmeans::register(m)?;
    metrics::register(m)?;
    neighbors::register(m)?;
    partial::register(m)?;
    random::register(m)?;
    relativity::register(m)?;
    trig::register(m)?;
    m.add("__version__", env!("CARGO_PKG_VERSION"))?;
    Ok(())
}
