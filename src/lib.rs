//! gyrokit: exact, fast gyrovector and hyperbolic-geometry operations.
//!
//! The numerical core is plain Rust over slices and `ndarray` views; the
//! optional `python` feature adds the pyo3 bindings (`gyrokit._native`).

pub mod ball;
pub mod batch;
pub mod centroids;
pub mod convert;
pub mod error;
pub mod halfspace;
pub mod hyperboloid;
pub mod klein;
pub mod neighbors;
pub mod numeric;
pub mod pairwise;
pub mod poincare;
pub mod relativity;
pub mod simd;
pub mod vptree;

pub use ball::Curvature;
pub use error::{Error, Result};

#[cfg(feature = "python")]
mod py;
