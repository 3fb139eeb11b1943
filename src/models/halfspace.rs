//! The upper half-space model: points `(y_1..d)` with `y_d > 0`, metric
//! `R^2 |dy|^2 / y_d^2` (curvature K = -1/R^2). The ball origin corresponds
//! to `(0, ..., 0, R)`.

//!
//! Its distance is computed with the other models' in `pairwise` (the
//! half-space is its own pair space there).

use crate::error::Fault;

/// Smallest last coordinate read (2^-250); coordinates are at most its
/// inverse in magnitude.
const MIN_LAST: f64 = 5.527147875260445e-76; // 2^-250

/// Checks a half-space point: finite, last coordinate > 0, within the range
/// (see [`Fault::BeyondHalfSpaceRange`]).
#[inline(always)]
pub fn read_point(y: &[f64]) -> std::result::Result<(), Fault> {
    if !y.iter().all(|v| v.is_finite()) {
        return Err(Fault::NonFinite);
    }
    let yd = y[y.len() - 1];
    if !(yd > 0.0) {
        return Err(Fault::NotInHalfSpace);
    }
    if yd < MIN_LAST || y.iter().any(|v| v.abs() > 1.0 / MIN_LAST) {
        return Err(Fault::BeyondHalfSpaceRange);
    }
    Ok(())
}
