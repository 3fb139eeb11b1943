//! The upper half-space model: points `(y_1..d)` with `y_d > 0`, metric
//! `R^2 |dy|^2 / y_d^2` (curvature K = -1/R^2). The ball origin corresponds
//! to `(0, ..., 0, R)`.

use crate::batch::{map_rows, scalar_core, Data, Operand, Output};
use crate::error::{Fault, Result, RowFault};
use crate::models::ball::Curvature;
use crate::numeric::{dist_sq, distance_from_half_delta};

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

/// `cosh(d/R) = 1 + |y - z|^2 / (2 y_d z_d)`, taken through asinh with the
/// difference formed from the inputs.
#[inline(always)]
pub fn distance(k: &Curvature, y: &[f64], z: &[f64]) -> f64 {
    let n = y.len() - 1;
    distance_from_half_delta(k.radius, dist_sq(y, z) / (4.0 * y[n] * z[n]))
}

/// Batched distance `(..., d), (..., d) -> (...)`.
pub fn distance_arrays<'a>(k: Curvature, x: Data<'a>, y: Data<'a>) -> Result<Output> {
    let ops = [Operand::point("x", x), Operand::point("y", y)];
    map_rows(
        &ops,
        &scalar_core,
        10,
        #[inline(always)]
        |r, out| {
            read_point(r[0]).map_err(|f| RowFault::new(0, f))?;
            read_point(r[1]).map_err(|f| RowFault::new(1, f))?;
            out[0] = distance(&k, r[0], r[1]);
            Ok(())
        },
    )
}
