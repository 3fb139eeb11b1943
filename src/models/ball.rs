//! The curvature parameter and the validation of ball points, shared by the
//! Poincaré and Klein models (both live in the ball of radius R).

use crate::error::{value_err, Fault, Result};
use crate::numeric::{gap_dd, DD};

/// Sectional curvature `K < 0`, with the derived constants every kernel uses.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Curvature {
    /// K itself (negative).
    pub k: f64,
    /// kappa = -K.
    pub kappa: f64,
    /// sqrt(kappa) = 1/R.
    pub sqrt_kappa: f64,
    /// Ball radius R = 1/sqrt(kappa).
    pub radius: f64,
}

impl Curvature {
    pub fn new(k: f64) -> Result<Curvature> {
        if !k.is_finite() || k >= 0.0 {
            return value_err(format!(
                "curvature must be a finite negative number (sectional curvature K < 0), got {k}"
            ));
        }
        let kappa = -k;
        let sqrt_kappa = kappa.sqrt();
        if !(kappa.is_normal() && sqrt_kappa.is_normal() && (1.0 / sqrt_kappa).is_finite()) {
            return value_err(format!("curvature {k} is too close to 0 or too large in magnitude"));
        }
        Ok(Curvature { k, kappa, sqrt_kappa, radius: 1.0 / sqrt_kappa })
    }

    /// The ball of radius `c` (relativity: c is the speed of light).
    pub fn from_radius(c: f64) -> Result<Curvature> {
        if !c.is_finite() || c <= 0.0 {
            return value_err(format!("c must be a finite positive number, got {c}"));
        }
        Curvature::new(-1.0 / (c * c))
    }
}

impl Default for Curvature {
    fn default() -> Self {
        Curvature { k: -1.0, kappa: 1.0, sqrt_kappa: 1.0, radius: 1.0 }
    }
}

/// Checks that `x` is finite and strictly inside the ball, returning its gap
/// `1 - kappa |x|^2` in double-double. The tolerance is zero: a point whose
/// compensated gap is <= 0 is rejected (it is on the sphere or outside).
#[inline(always)]
pub fn checked_gap(c: &Curvature, x: &[f64]) -> std::result::Result<DD, Fault> {
    let g = gap_dd(c.kappa, x);
    // NaN or infinite coordinates make the sum of squares non-finite; so do
    // finite coordinates too large to square (which are outside anyway).
    if !g.hi.is_finite() {
        return Err(if x.iter().all(|v| v.is_finite()) { Fault::OutsideBall(f64::INFINITY) } else { Fault::NonFinite });
    }
    if g.hi > 0.0 {
        Ok(g)
    } else {
        // |x|/R - 1 = sqrt(1 - g) - 1, for the message only.
        Err(Fault::OutsideBall((1.0 - g.value()).sqrt() - 1.0))
    }
}

/// Checks that every coordinate is finite.
#[inline(always)]
pub fn check_finite(x: &[f64]) -> std::result::Result<(), Fault> {
    if x.iter().all(|v| v.is_finite()) {
        Ok(())
    } else {
        Err(Fault::NonFinite)
    }
}

/// Keeps a computed ball point strictly inside: a result whose exact value
/// lies inside the ball but within ~1e-16 R of the sphere (or beyond what
/// float64 can resolve) can round onto or past it. It is moved along its ray
/// to the largest float64 radius inside, so it can be fed back into any
/// function. Cheap: a plain sum of squares decides whether the double-double
/// check is needed at all.
#[inline(always)]
pub fn keep_inside(c: &Curvature, out: &mut [f64]) {
    if c.kappa * crate::numeric::sumsq(out) < 1.0 - 1e-12 {
        return;
    }
    let g = crate::numeric::gap_dd(c.kappa, out);
    if g.hi > 0.0 {
        return;
    }
    // Rescale to radius just below R, then step inward ulp by ulp.
    let q = (1.0 - g.value()).sqrt();
    let f = (1.0 - f64::EPSILON) / q;
    out.iter_mut().for_each(|o| *o *= f);
    let shrink = 1.0 - f64::EPSILON / 2.0;
    let mut guard = 0;
    while crate::numeric::gap_dd(c.kappa, out).hi <= 0.0 && guard < 64 {
        out.iter_mut().for_each(|o| *o *= shrink);
        guard += 1;
    }
}
