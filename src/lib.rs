//! gyrokit: exact, fast gyrovector and hyperbolic-geometry operations.
//!
//! The numerical core is plain Rust over slices and `ndarray` views; the
//! optional `python` feature adds the pyo3 bindings (`gyrokit._native`).
//!
//! Layout: `numeric` (compensated arithmetic, stable transcendental forms,
//! SIMD dispatch), `batch` (the broadcasting engine of element-wise
//! functions), `models` (the four models and the conversions through the
//! hub), `pairwise` (prepared point sets, matrices, neighbours, the tree
//! index), `stats` (centroids, dispersion, clustering), `embed` (tree
//! embedding, h-MDS, learned graph embeddings), `metrics` (distortion,
//! reconstruction, tree distances), `relativity`
//! (velocities in physical units), `py` (the pyo3 layer).

pub mod batch;
pub mod embed;
pub mod error;
pub mod metrics;
pub mod models;
pub mod numeric;
pub mod pairwise;
pub mod random;
pub mod relativity;
pub mod stats;
pub mod tree;
pub mod trig;

pub use error::{Error, Result};
pub use models::ball::Curvature;
pub use models::{halfspace, hyperboloid, klein, poincare, Model};

#[cfg(feature = "python")]
mod py;
