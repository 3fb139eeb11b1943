//! The curvature parameter and the validation of ball points, shared by the
//! Poincaré and Klein models (both live in the ball of radius R).

use std::sync::atomic::{AtomicUsize, Ordering};

use crate::batch::{map_rows, point_core, Data, Operand, Output};
use crate::error::{value_err, Fault, Result, RowFault};
use crate::numeric::{gap_dd, sumsq, sumsq_dd, with_scratch, DD};

/// Smallest `kappa = -K` accepted (2^-500); the largest is its inverse.
const MIN_KAPPA: f64 = 3.054936363499605e-151; // 2^-500

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
        // |K| within 2^-500..2^500 (about 3e-151..3e150): products such as
        // kappa |x|^2 |y|^2 and R^2 kappa then stay in float64's range.
        if !(MIN_KAPPA..=1.0 / MIN_KAPPA).contains(&kappa) {
            return value_err(format!(
                "curvature {k} is out of range: |curvature| must lie between 2^-500 and 2^500 (about 3e-151 and 3e150)"
            ));
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

/// [`checked_gap`] for operand number `arg` of a row kernel, as a plain
/// float64 gap.
#[inline(always)]
pub fn point_gap(c: &Curvature, x: &[f64], arg: usize) -> std::result::Result<f64, RowFault> {
    checked_gap(c, x).map(|g| g.value()).map_err(|f| RowFault::new(arg, f))
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

/// [`check_finite`] for operand number `arg` of a row kernel.
#[inline(always)]
pub fn finite_row(x: &[f64], arg: usize) -> std::result::Result<(), RowFault> {
    check_finite(x).map_err(|f| RowFault::new(arg, f))
}

// ------------------------------------------------------------- the rim
//
// A ball model can only hold points whose radius float64 (or float32)
// resolves below R. The rule, for a computed point whose exact gap `g`
// (`1 - kappa |x|^2` of the exact result) is known from the gap identities
// of its operation, accurate to a few ulps relative:
//
// * `g >= u` (`u = 2^-53`, `2^-24` for float32 results): the exact radius
//   `sqrt(1 - g) R` rounds to a radius below R, so the result is held. If
//   the last rounding of its coordinates put it on or past the sphere (a
//   few ulps of coordinate error are worth `O(u)` of gap), it is moved
//   along its ray to the last radius inside: that is the rounding the exact
//   value would get anyway.
// * `g < u`: the exact result lies within `u/2` R of the sphere, closer to
//   it than to the last representable radius (`1 - u` on an axis): beyond
//   what the dtype holds, at any rounding. It is a row fault, or, when the
//   caller opts in, clipped to the last radius and counted.
//
// The rule judges the exact gap, never the gap of the rounded coordinates
// alone: those can land inside by chance (at 37.4 R for a result 41 R out).

/// The unit roundoff of the output dtype.
#[inline(always)]
fn unit_roundoff(f32_out: bool) -> f64 {
    if f32_out {
        f32::EPSILON as f64 / 2.0
    } else {
        f64::EPSILON / 2.0
    }
}

/// Rounds `out` to the output dtype (no-op for float64).
#[inline(always)]
fn round_to(out: &mut [f64], f32_out: bool) {
    if f32_out {
        out.iter_mut().for_each(|o| *o = *o as f32 as f64);
    }
}

/// Writes `x` moved along its ray to radius `lim R` (`|x|/R = q` given),
/// or the first radius below it whose coordinates, rounded to the output
/// dtype, are strictly inside the ball. The scale factor steps inward by
/// 1, 2, 4, ... of its ulps, so the loop ends after a few steps whatever
/// the rounding.
#[inline(always)]
fn pull_to(c: &Curvature, x: &[f64], q: f64, lim: f64, f32_out: bool, out: &mut [f64]) {
    let f0 = lim / q;
    let mut k = 0u64;
    loop {
        let f = f64::from_bits(f0.to_bits() - k);
        for (o, &xi) in out.iter_mut().zip(x) {
            *o = f * xi;
        }
        round_to(out, f32_out);
        if gap_dd(c.kappa, out).hi > 0.0 || k >= 1 << 52 {
            return;
        }
        k = if k == 0 { 1 } else { 2 * k };
    }
}

/// Moves `out` along its ray to the last radius strictly inside the ball
/// that the output dtype holds (`1 - u` R, or the first radius below it
/// whose rounded coordinates are inside). `out` must be nonzero and finite.
#[inline(never)]
#[cold]
pub fn clip_to_rim(c: &Curvature, out: &mut [f64], f32_out: bool) {
    let q = (c.kappa * sumsq_dd(out).value()).sqrt();
    with_scratch(out.len(), |x| {
        x.copy_from_slice(out);
        pull_to(c, x, q, 1.0 - unit_roundoff(f32_out), f32_out, out);
    });
}

/// Keeps a computed ball point strictly inside when its exact value is
/// inside by construction and only the last rounding can put it on the
/// sphere (e.g. a velocity below c mapped into the Klein ball): such a
/// point is moved along its ray to the last float64 radius inside.
#[inline(always)]
pub fn keep_inside(c: &Curvature, out: &mut [f64]) {
    if c.kappa * sumsq(out) < 1.0 - 1e-12 {
        return;
    }
    if gap_dd(c.kappa, out).hi <= 0.0 {
        clip_to_rim(c, out, false);
    }
}

/// Applies the rim rule (see above) to a computed point `out` whose exact
/// gap is `g`: true when the point is held (moved inward by its last
/// rounding if need be), false when its exact value is beyond what the
/// output dtype holds (`out` is left as computed).
#[inline(always)]
pub fn settle(c: &Curvature, out: &mut [f64], g: f64, f32_out: bool) -> bool {
    let u = unit_roundoff(f32_out);
    // Far from the sphere (the usual case): neither the exact value nor the
    // rounded coordinates come near it.
    if g >= 8192.0 * u && c.kappa * sumsq(out) <= 1.0 - 4096.0 * u {
        return true;
    }
    settle_near_rim(c, out, g, f32_out)
}

#[inline(never)]
fn settle_near_rim(c: &Curvature, out: &mut [f64], g: f64, f32_out: bool) -> bool {
    // (a NaN gap is no evidence of a held result either)
    if g.is_nan() || g < unit_roundoff(f32_out) {
        return false;
    }
    round_to(out, f32_out);
    if gap_dd(c.kappa, out).hi <= 0.0 {
        clip_to_rim(c, out, f32_out);
    }
    true
}

/// What a ball-model function does with a result beyond what its output
/// dtype holds.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum OnRim {
    /// A row fault (ValueError naming the row): the default.
    Raise,
    /// Clip to the last radius inside and count the row (the Python layer
    /// warns with the count).
    Clip,
}

impl OnRim {
    pub const NAMES: [&'static str; 2] = ["raise", "clip"];

    /// Parses the `on_rim` keyword.
    pub fn parse(name: &str) -> Result<OnRim> {
        match name {
            "raise" => Ok(OnRim::Raise),
            "clip" => Ok(OnRim::Clip),
            _ => value_err(format!("on_rim must be one of {:?}, got {name:?}", OnRim::NAMES)),
        }
    }
}

/// The rim policy of one batched call, with the number of rows it clipped.
#[derive(Debug)]
pub struct Rim {
    pub mode: OnRim,
    clipped: AtomicUsize,
}

impl Rim {
    pub fn new(mode: OnRim) -> Rim {
        Rim { mode, clipped: AtomicUsize::new(0) }
    }

    /// The default policy: results beyond the rim are row faults.
    pub fn raise() -> Rim {
        Rim::new(OnRim::Raise)
    }

    /// Rows clipped so far.
    pub fn clipped(&self) -> usize {
        self.clipped.load(Ordering::Relaxed)
    }

    /// [`settle`] with this policy: a result beyond the rim is a fault of
    /// the row (blamed on operand `arg`, the first point operand) naming
    /// `model`, or clipped and counted.
    #[inline(always)]
    pub fn apply(
        &self,
        c: &Curvature,
        out: &mut [f64],
        g: f64,
        f32_out: bool,
        model: &'static str,
        arg: usize,
    ) -> std::result::Result<(), RowFault> {
        if settle(c, out, g, f32_out) {
            return Ok(());
        }
        match self.mode {
            OnRim::Raise => Err(RowFault::new(arg, Fault::BeyondBall(model, f32_out))),
            OnRim::Clip => {
                clip_to_rim(c, out, f32_out);
                self.clipped.fetch_add(1, Ordering::Relaxed);
                Ok(())
            }
        }
    }
}

// ------------------------------------------------------------ projection

/// Pulls a point whose norm exceeds `(1 - margin) R` back onto that sphere
/// along its ray; points inside it are returned unchanged. `margin` is
/// checked by the caller (0 < margin < 1, 1 - margin < 1).
#[inline(always)]
pub fn project(c: &Curvature, x: &[f64], margin: f64, out: &mut [f64]) {
    let lim = 1.0 - margin;
    let g = gap_dd(c.kappa, x);
    // |x|/R > lim  <=>  g < 1 - lim^2 = margin (2 - margin)
    if g.hi >= margin * (2.0 - margin) {
        out.copy_from_slice(x);
        return;
    }
    if g.hi.is_finite() {
        pull_to(c, x, (1.0 - g.value()).sqrt(), lim, false, out);
        return;
    }
    // |x|^2 overflows: the ray is the same for x scaled by a power of two
    // (exact), whose norm fits.
    let e = crate::numeric::scale_exponent(x);
    with_scratch(x.len(), |xs| {
        let f = crate::numeric::pow2(-e);
        for (o, &v) in xs.iter_mut().zip(x) {
            *o = v * f;
        }
        pull_to(c, xs, (c.kappa * sumsq_dd(xs).value()).sqrt(), lim, false, out);
    });
}

/// Checks a projection margin: finite, in (0, 1), and with `1 - margin < 1`.
pub fn check_margin(margin: f64) -> Result<()> {
    if margin.is_finite() && margin > 0.0 && margin < 1.0 && 1.0 - margin < 1.0 {
        Ok(())
    } else {
        value_err(format!("margin must satisfy 1.1e-16 < margin < 1 (so that 1 - margin < 1 in float64), got {margin}"))
    }
}

/// Batched projection into the ball of radius `(1 - margin) R` (Poincaré
/// and Klein points alike: both models live in the ball).
pub fn project_arrays<'a>(c: Curvature, x: Data<'a>, margin: f64) -> Result<Output> {
    check_margin(margin)?;
    // A float32 result must still be inside after rounding to float32.
    let margin = if x.is_f32() { margin.max(4.0 * f32::EPSILON as f64) } else { margin };
    let ops = [Operand::point("x", x)];
    map_rows(
        &ops,
        &point_core,
        8,
        #[inline(always)]
        |r, out| {
            finite_row(r[0], 0)?;
            project(&c, r[0], margin, out);
            Ok(())
        },
    )
}
