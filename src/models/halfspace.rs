//! The upper half-space model: points `(y_1..d)` with `y_d > 0`, metric
//! `R^2 |dy|^2 / y_d^2` (curvature K = -1/R^2). The ball origin corresponds
//! to `(0, ..., 0, R)`.

//!
//! Its distance is computed with the other models' in `pairwise` (the
//! half-space is its own pair space there).

use crate::error::Fault;

/// Checks a half-space point: finite with last coordinate > 0.
#[inline(always)]
pub fn read_point(y: &[f64]) -> std::result::Result<(), Fault> {
    if !y.iter().all(|v| v.is_finite()) {
        return Err(Fault::NonFinite);
    }
    if y[y.len() - 1] > 0.0 {
        Ok(())
    } else {
        Err(Fault::NotInHalfSpace)
    }
}
