//! Relativistic velocities in physical units: the Einstein gyrovector space
//! of 3-velocities, the open ball of radius c.
//!
//! The velocity ball IS the Klein ball of radius c (curvature -1/c^2):
//! composition is [`klein::add_g`] and the Thomas rotation is
//! [`klein::gyration_g`], one formula in one place. What this module adds is
//! physical units done without losing digits:
//!
//! * The gap `g = 1 - |v|^2/c^2` is `(c^2 - |v|^2)/c^2` with `c^2` and
//!   `|v|^2` in double-double. Going through `kappa = 1/c^2` would not do:
//!   `c^2` is not a float64 for c = 299 792 458, and the rounded kappa leaves
//!   an absolute error of ~1e-16 in g, 5% of g at 1 - |v|/c = 1e-15. The
//!   kernels of the Klein module take the gaps as arguments (`*_g` forms) and
//!   use kappa only in products that keep their relative accuracy.
//! * `beta^2 = |v|^2/c^2` is kept beside the gap: at 1 m/s the gap rounds to
//!   1, and gamma - 1 = 5.6e-18 must come from beta^2 itself
//!   (`gamma - 1 = beta^2/(sqrt(g)(1 + sqrt(g)))`, no subtraction).
//! * Velocities and c are first scaled by the same power of two (exact), so
//!   that c lies in [1, 2): no sum of squares over- or underflows in any unit
//!   system, and the Klein kernels work in a ball of radius ~1.
//! * Small rotation angles come from an `atan2` form whose sine part is a
//!   cross product of error-free 2x2 minors, never from `acos((tr - 1)/2)`,
//!   which returns 0 for the 1e-17 rad angles of everyday speeds.

use crate::batch::{map_rows, scalar_core, Core, Data, Operand, Output};
use crate::error::{Error, Fault, Result, RowFault};
use crate::models::ball::{checked_gap, keep_inside, Curvature};
use crate::models::klein;
use crate::numeric::{artanh_from_gap, minor, sumsq, sumsq_dd, two_prod, DD};
use crate::numeric::{pow2, scale_exponent};

/// The speed of light in SI units (m/s), the default `c`.
pub const SPEED_OF_LIGHT: f64 = 299_792_458.0;

/// The speed of light `c` in the caller's units, with the constants every
/// kernel needs. Velocities are handled in *scaled units*: multiplied by
/// `2^-e` (exact) where `c = m 2^e`, `m` in [1, 2).
#[derive(Clone, Copy, Debug)]
pub struct Light {
    /// c in the caller's units.
    pub c: f64,
    /// c in scaled units, in [1, 2).
    cs: f64,
    /// `2^-e`: caller units to scaled units.
    down: f64,
    /// `2^e`: scaled units back to the caller's.
    up: f64,
    /// `cs^2` exactly, as a double-double.
    c2: DD,
    /// `cs^2` rounded.
    c2v: f64,
    /// The Klein ball of radius `cs`: the (scaled) velocity ball.
    ball: Curvature,
}

/// What the kernels need to know about one velocity: `beta^2 = |v|^2/c^2`
/// and the gap `1 - beta^2`, each correct to a few ulps (relative).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Speed {
    pub beta2: f64,
    pub gap: f64,
}

impl Light {
    /// Validates `c`: finite, positive, with `c^2` and `1/c^2` normal
    /// float64 numbers. The kernels work with `c` scaled into [1, 2) (the
    /// ball below is that of the scaled `c`), so `c` itself may lie outside
    /// the curvature range of the ball models.
    pub fn new(c: f64) -> Result<Light> {
        let c2 = c * c;
        if !(c.is_finite() && c > 0.0 && c2.is_normal() && (1.0 / c2).is_normal()) {
            return Err(crate::error::Error::Value(format!(
                "c must be a finite positive number with c^2 and 1/c^2 within float64's normal range, got {c}"
            )));
        }
        // c is a positive normal number here: read its binary exponent.
        let e = ((c.to_bits() >> 52) & 0x7ff) as i32 - 1023;
        let (down, up) = (pow2(-e), pow2(e));
        let cs = c * down;
        let (p, pe) = two_prod(cs, cs);
        let c2 = DD::new(p, pe);
        Ok(Light { c, cs, down, up, c2, c2v: c2.value(), ball: Curvature::from_radius(cs)? })
    }

    /// `v` (caller units) in scaled units.
    #[inline(always)]
    pub fn load(&self, v: &[f64]) -> [f64; 3] {
        [v[0] * self.down, v[1] * self.down, v[2] * self.down]
    }

    /// Writes a scaled velocity back in the caller's units.
    #[inline(always)]
    fn store(&self, vs: &[f64; 3], out: &mut [f64]) {
        for i in 0..3 {
            out[i] = vs[i] * self.up;
        }
    }

    /// beta^2 and the gap of a scaled velocity; a fault when it is not finite
    /// or not strictly slower than light (decided on the double-double
    /// `c^2 - |v|^2`, so with no tolerance).
    #[inline(always)]
    pub fn speed(&self, vs: &[f64]) -> std::result::Result<Speed, Fault> {
        let q = sumsq_dd(vs);
        if !q.hi.is_finite() {
            return Err(if vs.iter().all(|x| x.is_finite()) {
                Fault::AtOrAboveLight(f64::INFINITY)
            } else {
                Fault::NonFinite
            });
        }
        let num = self.c2.sub(q);
        if num.hi <= 0.0 {
            return Err(Fault::AtOrAboveLight((q.value() / self.c2v).sqrt() - 1.0));
        }
        Ok(Speed { beta2: q.value() / self.c2v, gap: num.value() / self.c2v })
    }

    /// Keeps a computed scaled velocity strictly below c: a result whose
    /// exact value is below c but within ~1e-16 c of it can round onto or
    /// past it. Moved along its ray to the largest float64 speed below c
    /// (the velocity counterpart of [`keep_inside`], judged by the same
    /// exact test as [`Light::speed`], so every result can be fed back).
    #[inline(always)]
    fn keep_below(&self, vs: &mut [f64; 3]) {
        if sumsq(vs) < self.c2.hi * (1.0 - 1e-12) {
            return;
        }
        if self.c2.sub(sumsq_dd(vs)).hi > 0.0 {
            return;
        }
        let q = (sumsq_dd(vs).value() / self.c2v).sqrt();
        let f = (1.0 - f64::EPSILON) / q;
        vs.iter_mut().for_each(|x| *x *= f);
        let shrink = 1.0 - f64::EPSILON / 2.0;
        let mut guard = 0;
        while self.c2.sub(sumsq_dd(vs)).hi <= 0.0 && guard < 64 {
            vs.iter_mut().for_each(|x| *x *= shrink);
            guard += 1;
        }
    }
}

/// The cross product `a x b` from error-free 2x2 minors. The inputs are first
/// normalised by powers of two (exact) so that the minors neither under- nor
/// overflow; returns the cross product of the normalised vectors and the two
/// exponents (the true product is `x 2^ea 2^eb`).
#[inline(always)]
fn cross_scaled(a: &[f64], b: &[f64]) -> ([f64; 3], i32, i32) {
    let (ea, eb) = (scale_exponent(a), scale_exponent(b));
    let (fa, fb) = (pow2(-ea), pow2(-eb));
    let a = [a[0] * fa, a[1] * fa, a[2] * fa];
    let b = [b[0] * fb, b[1] * fb, b[2] * fb];
    let x = [minor(a[1], b[2], a[2], b[1]), minor(a[2], b[0], a[0], b[2]), minor(a[0], b[1], a[1], b[0])];
    (x, ea, eb)
}

// ------------------------------------------------------ per-point kernels
// All in scaled units (`Light::load`), with the speeds from `Light::speed`.

/// `gamma = 1 + (gamma - 1)`: the sum rounds once, so gamma is correctly
/// rounded at low speeds (`1/sqrt(g)` rounds g, the root and the quotient,
/// and is off by an ulp there), and as accurate as `gamma - 1` near c.
#[inline(always)]
pub fn lorentz_factor_s(s: Speed) -> f64 {
    1.0 + gamma_minus_one_s(s)
}

/// `gamma - 1 = beta^2/(sqrt(g)(1 + sqrt(g)))`: no subtraction, so 1 m/s gives
/// 5.6e-18 with full relative accuracy (the textbook `gamma - 1` gives 0).
#[inline(always)]
pub fn gamma_minus_one_s(s: Speed) -> f64 {
    let r = s.gap.sqrt();
    s.beta2 / (r * (1.0 + r))
}

/// Einstein velocity addition `u ⊕ v` (scaled units): the Klein addition in
/// the ball of radius c, fed the exact gaps. Kept strictly below c.
#[inline(always)]
pub fn compose_s(l: &Light, us: &[f64; 3], su: Speed, vs: &[f64; 3], sv: Speed, out: &mut [f64; 3]) {
    klein::add_g(&l.ball, us, su.gap, vs, sv.gap, 1.0, out);
    l.keep_below(out);
}

/// The matrix of `gyr[u, v]`, row-major into `out` (9 values): column `j` is
/// `gyr[u, v] e_j`, the Klein gyration with the exact gaps.
#[inline(always)]
pub fn thomas_rotation_s(l: &Light, us: &[f64; 3], su: Speed, vs: &[f64; 3], sv: Speed, out: &mut [f64]) {
    let mut col = [0.0; 3];
    for j in 0..3 {
        let mut e = [0.0; 3];
        e[j] = 1.0;
        klein::gyration_g(&l.ball, us, su.gap, vs, sv.gap, &e, &mut col);
        for i in 0..3 {
            out[3 * i + j] = col[i];
        }
    }
}

/// The rotation angle of `gyr[u, v]`, in [0, pi).
///
/// Writing each boost as the spinor `cosh(θ/2) + sinh(θ/2) n.σ` and reading
/// off the unitary factor of the product gives
/// `tan(ε/2) = |u x v|/c^2 / ((1 + a_u)(1 + a_v) + u.v/c^2)`,
/// `a = sqrt(g) = 1/gamma` (checked against the polar decomposition of the
/// boost product and against the perpendicular-boost closed form in the
/// tests). The denominator is rewritten with
/// `1 + u.v/c^2 = (g_u + g_v)/2 + |u + v|^2/(2c^2)` (a sum of positive
/// terms, so nearly opposite velocities near c do not cancel), and the
/// numerator is the cross product of error-free minors, so the angle has
/// full relative accuracy down to the `|u x v|/(2c^2)` of slow velocities.
#[inline(always)]
pub fn wigner_angle_s(l: &Light, us: &[f64; 3], su: Speed, vs: &[f64; 3], sv: Speed) -> f64 {
    let (ru, rv) = (su.gap.sqrt(), sv.gap.sqrt());
    let s = [us[0] + vs[0], us[1] + vs[1], us[2] + vs[2]];
    let k = l.ball.kappa;
    let den = ru + rv + ru * rv + 0.5 * (su.gap + sv.gap) + 0.5 * k * sumsq(&s);
    let (x, eu, ev) = cross_scaled(us, vs);
    let num = k * sumsq(&x).sqrt() * pow2(eu) * pow2(ev);
    2.0 * num.atan2(den)
}

/// The unit rotation axis of `gyr[u, v]` oriented so that `gyr[u, v]` turns
/// by [`wigner_angle_s`] counter-clockwise (right hand) about it: the
/// direction of `v x u`. The zero vector when `u` and `v` are parallel
/// (the rotation is the identity and has no axis).
#[inline(always)]
pub fn wigner_axis_s(us: &[f64; 3], vs: &[f64; 3], out: &mut [f64]) {
    let (x, _, _) = cross_scaled(vs, us);
    let n = sumsq(&x).sqrt();
    for i in 0..3 {
        out[i] = if n > 0.0 { x[i] / n } else { 0.0 };
    }
}

/// The 4x4 pure boost (row-major, acting on `(ct, x, y, z)`) taking the rest
/// four-velocity to that of `v`:
/// `[[gamma, gamma v^T/c], [gamma v/c, I + (gamma - 1) v v^T/|v|^2]]`, with
/// `(gamma - 1)/|v|^2 = 1/(c^2 a (1 + a))` (no division by |v|, no
/// cancellation). Exactly symmetric.
#[inline(always)]
pub fn boost_s(l: &Light, vs: &[f64; 3], sv: Speed, out: &mut [f64]) {
    let r = sv.gap.sqrt();
    out[0] = 1.0 / r;
    let b = 1.0 / (r * l.cs);
    let f = l.ball.kappa / (r * (1.0 + r));
    for i in 0..3 {
        let bi = b * vs[i];
        out[i + 1] = bi;
        out[4 * (i + 1)] = bi;
        for j in i..3 {
            let m = (f * vs[i]) * vs[j] + if i == j { 1.0 } else { 0.0 };
            out[4 * (i + 1) + j + 1] = m;
            out[4 * (j + 1) + i + 1] = m;
        }
    }
}

/// The Thomas precession angular velocity
/// `omega_T = gamma^2/(gamma + 1) (a x v)/c^2`, with
/// `gamma^2/(gamma + 1) = 1/(a_v (1 + a_v))`; `as_` is the acceleration in
/// scaled units (multiplied by the same power of two). Fails only when the
/// result overflows.
#[inline(always)]
pub fn thomas_precession_s(
    l: &Light,
    vs: &[f64; 3],
    sv: Speed,
    as_: &[f64; 3],
    out: &mut [f64],
) -> std::result::Result<(), Fault> {
    let r = sv.gap.sqrt();
    let f = l.ball.kappa / (r * (1.0 + r));
    let (x, ea, ev) = cross_scaled(as_, vs);
    for i in 0..3 {
        out[i] = ((f * x[i]) * pow2(ea)) * pow2(ev);
    }
    if out.iter().all(|o| o.is_finite()) {
        Ok(())
    } else {
        Err(Fault::Overflow)
    }
}

/// The rapidity vector `artanh(|v|/c) v/|v|` (dimensionless), with artanh
/// taken from the exact gap (no `1 - |v|/c`, which has no digits left near
/// c).
#[inline(always)]
pub fn rapidity_s(l: &Light, vs: &[f64; 3], sv: Speed, out: &mut [f64]) {
    let t = sv.beta2.sqrt();
    // artanh(t)/t -> 1 as t -> 0.
    let f = if t > 0.0 { artanh_from_gap(t, sv.gap) / t } else { 1.0 };
    for i in 0..3 {
        out[i] = f * (vs[i] / l.cs);
    }
}

/// The velocity `c tanh(|w|) w/|w|` of a rapidity vector `w` (finite), in
/// scaled units, kept strictly below c. For `|w|` above ~19 the speed rounds
/// to c in float64; the result is then the largest float64 speed below c
/// along `w`.
#[inline(always)]
pub fn velocity_from_rapidity_s(l: &Light, w: &[f64], out: &mut [f64; 3]) {
    // Normalise by a power of two so |w| cannot overflow for huge w.
    let e = scale_exponent(w);
    let f = pow2(-e);
    let ws = [w[0] * f, w[1] * f, w[2] * f];
    let ns = sumsq(&ws).sqrt();
    let n = ns * pow2(e);
    if n < 1.0 {
        // tanh(n)/n keeps its digits as n -> 0 (limit 1).
        let t = if n > 0.0 { n.tanh() / n } else { 1.0 };
        for i in 0..3 {
            out[i] = (l.cs * t) * w[i];
        }
    } else {
        let t = l.cs * n.tanh() / ns;
        for i in 0..3 {
            out[i] = t * ws[i];
        }
    }
    l.keep_below(out);
}

// ------------------------------------------------- per-point, caller units

fn speed_of(l: &Light, v: &[f64; 3]) -> std::result::Result<([f64; 3], Speed), Fault> {
    let vs = l.load(v);
    let s = l.speed(&vs)?;
    Ok((vs, s))
}

/// The Lorentz factor of `v` (caller units).
pub fn lorentz_factor(l: &Light, v: &[f64; 3]) -> std::result::Result<f64, Fault> {
    Ok(lorentz_factor_s(speed_of(l, v)?.1))
}

/// `gamma - 1` of `v`, accurate for slow velocities.
pub fn gamma_minus_one(l: &Light, v: &[f64; 3]) -> std::result::Result<f64, Fault> {
    Ok(gamma_minus_one_s(speed_of(l, v)?.1))
}

/// `u ⊕ v` in the caller's units.
pub fn compose(l: &Light, u: &[f64; 3], v: &[f64; 3]) -> std::result::Result<[f64; 3], Fault> {
    let ((us, su), (vs, sv)) = (speed_of(l, u)?, speed_of(l, v)?);
    let mut o = [0.0; 3];
    compose_s(l, &us, su, &vs, sv, &mut o);
    let mut out = [0.0; 3];
    l.store(&o, &mut out);
    Ok(out)
}

/// The matrix of `gyr[u, v]` (columns: images of e1, e2, e3).
pub fn thomas_rotation(l: &Light, u: &[f64; 3], v: &[f64; 3]) -> std::result::Result<[[f64; 3]; 3], Fault> {
    let ((us, su), (vs, sv)) = (speed_of(l, u)?, speed_of(l, v)?);
    let mut m = [0.0; 9];
    thomas_rotation_s(l, &us, su, &vs, sv, &mut m);
    Ok([[m[0], m[1], m[2]], [m[3], m[4], m[5]], [m[6], m[7], m[8]]])
}

/// The rotation angle of `gyr[u, v]`.
pub fn wigner_angle(l: &Light, u: &[f64; 3], v: &[f64; 3]) -> std::result::Result<f64, Fault> {
    let ((us, su), (vs, sv)) = (speed_of(l, u)?, speed_of(l, v)?);
    Ok(wigner_angle_s(l, &us, su, &vs, sv))
}

/// The unit axis of `gyr[u, v]` (direction of `v x u`; zero when parallel).
pub fn wigner_axis(l: &Light, u: &[f64; 3], v: &[f64; 3]) -> std::result::Result<[f64; 3], Fault> {
    let ((us, _), (vs, _)) = (speed_of(l, u)?, speed_of(l, v)?);
    let mut o = [0.0; 3];
    wigner_axis_s(&us, &vs, &mut o);
    Ok(o)
}

/// The 4x4 pure boost of `v`.
pub fn boost(l: &Light, v: &[f64; 3]) -> std::result::Result<[[f64; 4]; 4], Fault> {
    let (vs, sv) = speed_of(l, v)?;
    let mut m = [0.0; 16];
    boost_s(l, &vs, sv, &mut m);
    let mut out = [[0.0; 4]; 4];
    for i in 0..4 {
        out[i].copy_from_slice(&m[4 * i..4 * i + 4]);
    }
    Ok(out)
}

/// The Thomas precession angular velocity for velocity `v`, acceleration `a`.
pub fn thomas_precession(l: &Light, v: &[f64; 3], a: &[f64; 3]) -> std::result::Result<[f64; 3], Fault> {
    let (vs, sv) = speed_of(l, v)?;
    let mut o = [0.0; 3];
    thomas_precession_s(l, &vs, sv, &l.load(a), &mut o)?;
    Ok(o)
}

/// The rapidity vector of `v`.
pub fn rapidity(l: &Light, v: &[f64; 3]) -> std::result::Result<[f64; 3], Fault> {
    let (vs, sv) = speed_of(l, v)?;
    let mut o = [0.0; 3];
    rapidity_s(l, &vs, sv, &mut o);
    Ok(o)
}

/// The velocity of the rapidity vector `w`.
pub fn velocity_from_rapidity(l: &Light, w: &[f64; 3]) -> [f64; 3] {
    let mut o = [0.0; 3];
    velocity_from_rapidity_s(l, w, &mut o);
    let mut out = [0.0; 3];
    l.store(&o, &mut out);
    out
}

// ---------------------------------------------------------------- batched

/// Every point operand here is a 3-vector: say so by name before the
/// engine's generic dimension check.
fn require3(ops: &[Operand]) -> Result<()> {
    for o in ops.iter().filter(|o| o.core == Core::Point) {
        let s = o.data.shape();
        match s.last() {
            Some(&3) => {}
            Some(&d) => {
                return Err(Error::Value(format!(
                    "{} must hold 3-vectors, shape (..., 3); its last axis has length {d}",
                    o.name
                )))
            }
            None => {
                return Err(Error::Value(format!(
                    "{} must have shape (..., 3) (3-vectors along the last axis); got a 0-d value",
                    o.name
                )))
            }
        }
    }
    Ok(())
}

fn vec3(_: usize) -> Vec<usize> {
    vec![3]
}
fn mat3(_: usize) -> Vec<usize> {
    vec![3, 3]
}
fn mat4(_: usize) -> Vec<usize> {
    vec![4, 4]
}

/// Loads row `arg` in scaled units and checks it is a velocity below c.
macro_rules! velocity {
    ($l:expr, $row:expr, $arg:expr) => {{
        let vs = $l.load($row);
        let s = $l.speed(&vs).map_err(|f| RowFault::new($arg, f))?;
        (vs, s)
    }};
}

fn unary<'a>(
    l: Light,
    name: &'static str,
    v: Data<'a>,
    out_core: &dyn Fn(usize) -> Vec<usize>,
    work: usize,
    kernel: impl Fn(&Light, &[f64; 3], Speed, &mut [f64]) + Sync,
) -> Result<Output> {
    let ops = [Operand::point(name, v)];
    require3(&ops)?;
    map_rows(
        &ops,
        out_core,
        work,
        #[inline(always)]
        |r, out| {
            let (vs, s) = velocity!(l, r[0], 0);
            kernel(&l, &vs, s, out);
            Ok(())
        },
    )
}

fn binary<'a>(
    l: Light,
    u: Data<'a>,
    v: Data<'a>,
    out_core: &dyn Fn(usize) -> Vec<usize>,
    work: usize,
    kernel: impl Fn(&Light, &[f64; 3], Speed, &[f64; 3], Speed, &mut [f64]) + Sync,
) -> Result<Output> {
    let ops = [Operand::point("u", u), Operand::point("v", v)];
    require3(&ops)?;
    map_rows(
        &ops,
        out_core,
        work,
        #[inline(always)]
        |r, out| {
            let (us, su) = velocity!(l, r[0], 0);
            let (vs, sv) = velocity!(l, r[1], 1);
            kernel(&l, &us, su, &vs, sv, out);
            Ok(())
        },
    )
}

/// Batched Lorentz factor `(..., 3) -> (...)`.
pub fn lorentz_factor_arrays<'a>(l: Light, v: Data<'a>) -> Result<Output> {
    unary(
        l,
        "v",
        v,
        &scalar_core,
        4,
        #[inline(always)]
        |_, _, s, out| out[0] = lorentz_factor_s(s),
    )
}

/// Batched `gamma - 1` `(..., 3) -> (...)`.
pub fn gamma_minus_one_arrays<'a>(l: Light, v: Data<'a>) -> Result<Output> {
    unary(
        l,
        "v",
        v,
        &scalar_core,
        4,
        #[inline(always)]
        |_, _, s, out| out[0] = gamma_minus_one_s(s),
    )
}

/// Batched Einstein velocity addition `u ⊕ v`.
pub fn compose_arrays<'a>(l: Light, u: Data<'a>, v: Data<'a>) -> Result<Output> {
    binary(
        l,
        u,
        v,
        &vec3,
        16,
        #[inline(always)]
        |l, us, su, vs, sv, out| {
            let mut o = [0.0; 3];
            compose_s(l, us, su, vs, sv, &mut o);
            l.store(&o, out);
        },
    )
}

/// Batched Thomas rotation matrices `(..., 3, 3)`.
pub fn thomas_rotation_arrays<'a>(l: Light, u: Data<'a>, v: Data<'a>) -> Result<Output> {
    binary(
        l,
        u,
        v,
        &mat3,
        120,
        // A closure marked inline(always), not the function item: the
        // kernel must be inlined into the SIMD dispatch copies.
        #[allow(clippy::redundant_closure)]
        #[inline(always)]
        |l, us, su, vs, sv, out| thomas_rotation_s(l, us, su, vs, sv, out),
    )
}

/// Batched Wigner rotation angle `(...)`.
pub fn wigner_angle_arrays<'a>(l: Light, u: Data<'a>, v: Data<'a>) -> Result<Output> {
    binary(
        l,
        u,
        v,
        &scalar_core,
        30,
        #[inline(always)]
        |l, us, su, vs, sv, out| out[0] = wigner_angle_s(l, us, su, vs, sv),
    )
}

/// Batched Wigner rotation axis `(..., 3)`.
pub fn wigner_axis_arrays<'a>(l: Light, u: Data<'a>, v: Data<'a>) -> Result<Output> {
    binary(
        l,
        u,
        v,
        &vec3,
        20,
        #[inline(always)]
        |_, us, _, vs, _, out| wigner_axis_s(us, vs, out),
    )
}

/// Batched pure boost matrices `(..., 4, 4)`.
pub fn boost_arrays<'a>(l: Light, v: Data<'a>) -> Result<Output> {
    unary(l, "v", v, &mat4, 20, boost_s)
}

/// Batched Thomas precession `(..., 3), (..., 3) -> (..., 3)`.
pub fn thomas_precession_arrays<'a>(l: Light, v: Data<'a>, a: Data<'a>) -> Result<Output> {
    let ops = [Operand::point("v", v), Operand::point("a", a)];
    require3(&ops)?;
    map_rows(
        &ops,
        &vec3,
        20,
        #[inline(always)]
        |r, out| {
            let (vs, sv) = velocity!(l, r[0], 0);
            crate::models::ball::check_finite(r[1]).map_err(|f| RowFault::new(1, f))?;
            thomas_precession_s(&l, &vs, sv, &l.load(r[1]), out).map_err(|f| RowFault::new(1, f))
        },
    )
}

/// Batched rapidity vectors `(..., 3) -> (..., 3)`.
pub fn rapidity_arrays<'a>(l: Light, v: Data<'a>) -> Result<Output> {
    unary(l, "v", v, &vec3, 16, rapidity_s)
}

/// Batched velocities of rapidity vectors `(..., 3) -> (..., 3)`.
pub fn velocity_from_rapidity_arrays<'a>(l: Light, w: Data<'a>) -> Result<Output> {
    let ops = [Operand::point("w", w)];
    require3(&ops)?;
    map_rows(
        &ops,
        &vec3,
        16,
        #[inline(always)]
        |r, out| {
            crate::models::ball::check_finite(r[0]).map_err(|f| RowFault::new(0, f))?;
            let mut o = [0.0; 3];
            velocity_from_rapidity_s(&l, r[0], &mut o);
            l.store(&o, out);
            Ok(())
        },
    )
}

/// Velocities to points of the Klein ball of curvature `ball`: `k = v R/c`.
/// The Klein ball of radius `c` (curvature `-1/c^2`) is the velocity ball
/// itself; any other radius is a rescaling. Results are kept strictly inside.
pub fn to_klein_arrays<'a>(l: Light, ball: Curvature, v: Data<'a>) -> Result<Output> {
    // v R/c = vs R/cs: the power of two of c cancels against that of v.
    let f = ball.radius / l.cs;
    unary(
        l,
        "v",
        v,
        &vec3,
        8,
        #[inline(always)]
        move |_, vs, _, out| {
            for i in 0..3 {
                out[i] = f * vs[i];
            }
            keep_inside(&ball, out);
        },
    )
}

/// Points of the Klein ball of curvature `ball` to velocities: `v = k c/R`,
/// kept strictly below c.
pub fn from_klein_arrays<'a>(l: Light, ball: Curvature, k: Data<'a>) -> Result<Output> {
    // k c/R in scaled units: k cs sqrt(kappa).
    let f = l.cs * ball.sqrt_kappa;
    let ops = [Operand::point("k", k)];
    require3(&ops)?;
    map_rows(
        &ops,
        &vec3,
        8,
        #[inline(always)]
        |r, out| {
            checked_gap(&ball, r[0]).map_err(|e| RowFault::new(0, e))?;
            let mut o = [f * r[0][0], f * r[0][1], f * r[0][2]];
            l.keep_below(&mut o);
            l.store(&o, out);
            Ok(())
        },
    )
}

#[cfg(test)]
mod tests {
    use super::*;
    use ndarray::{ArrayD, IxDyn};

    const C: f64 = SPEED_OF_LIGHT;

    fn light() -> Light {
        Light::new(C).unwrap()
    }

    fn rel(a: f64, b: f64) -> f64 {
        ((a - b) / b).abs()
    }

    fn norm(x: &[f64]) -> f64 {
        x.iter().map(|v| v * v).sum::<f64>().sqrt()
    }

    fn mat4_mul(a: &[[f64; 4]; 4], b: &[[f64; 4]; 4]) -> [[f64; 4]; 4] {
        let mut m = [[0.0; 4]; 4];
        for i in 0..4 {
            for j in 0..4 {
                m[i][j] = (0..4).map(|k| a[i][k] * b[k][j]).sum();
            }
        }
        m
    }

    #[test]
    fn gamma_minus_one_keeps_digits_at_walking_speed() {
        // Handbook: (1 - b^2)^(-1/2) - 1 = b^2/2 + 3 b^4/8 + ...; at 1 m/s the
        // b^4 term is 1e-35 relative, so b^2/2 = 1/(2 c^2) is the answer.
        let l = light();
        let g1 = gamma_minus_one(&l, &[1.0, 0.0, 0.0]).unwrap();
        let want = 0.5 / (C * C);
        assert!(rel(g1, want) < 1e-15, "{g1} vs {want}");
        assert!((5.5e-18..5.7e-18).contains(&g1));
        // Split over three axes the same (|v| = 1 m/s up to rounding of 1/sqrt(3)).
        let s = 1.0 / 3f64.sqrt();
        let g3 = gamma_minus_one(&l, &[s, s, s]).unwrap();
        assert!(rel(g3, want) < 1e-15);
        assert_eq!(lorentz_factor(&l, &[1.0, 0.0, 0.0]).unwrap(), 1.0);
    }

    #[test]
    fn lorentz_factor_near_c_matches_exact_difference_route() {
        // gamma = c/sqrt((c - v)(c + v)): c - v is exact (Sterbenz), c + v
        // rounds once: an independent accurate route (common practice).
        let l = light();
        for d in [3e-7, 1e-5, 0.25, 1e3] {
            let v = C - d;
            let want = C / ((C - v) * (C + v)).sqrt();
            let got = lorentz_factor(&l, &[0.0, v, 0.0]).unwrap();
            assert!(rel(got, want) < 2e-15, "d = {d}: {got} vs {want}");
        }
        // 1 - |v|/c = 1e-15: g is 2e-15; through a rounded 1/c^2 it would be
        // wrong by up to ~5%, so this cannot pass by luck.
        let v = C * (1.0 - 1e-15);
        let want = C / ((C - v) * (C + v)).sqrt();
        assert!(rel(lorentz_factor(&l, &[v, 0.0, 0.0]).unwrap(), want) < 2e-15);
    }

    #[test]
    fn collinear_composition_is_the_handbook_formula() {
        // Handbook: w = (u + v)/(1 + u v/c^2) for parallel velocities.
        let l = light();
        for (u, v) in [(1.0, 2.0), (1e5, -3e4), (0.6 * C, 0.7 * C), (0.999 * C, -0.9989 * C)] {
            let w = compose(&l, &[u, 0.0, 0.0], &[v, 0.0, 0.0]).unwrap();
            // c^2 (u + v)/(c^2 + u v) with the products error-free: the
            // float64 1 + u v/c^2 cancels for the last (nearly opposite) pair.
            let (p, pe) = two_prod(C, C);
            let (q, qe) = two_prod(u, v);
            let den = DD::new(p, pe).add(DD::new(q, qe)).value();
            let want = (u + v) * (p / den) + (u + v) * (pe / den);
            assert!((w[0] - want).abs() <= 1e-14 * want.abs().max(1e-300), "{u} {v}: {} vs {want}", w[0]);
            assert_eq!((w[1], w[2]), (0.0, 0.0));
        }
    }

    #[test]
    fn rapidities_add_along_a_line() {
        // Handbook: collinear rapidities add. Also rapidity round trip.
        let l = light();
        let (u, v) = ([0.0, 0.0, 0.8 * C], [0.0, 0.0, 0.55 * C]);
        let w = compose(&l, &u, &v).unwrap();
        let (ru, rv, rw) = (rapidity(&l, &u).unwrap(), rapidity(&l, &v).unwrap(), rapidity(&l, &w).unwrap());
        assert!(rel(rw[2], ru[2] + rv[2]) < 1e-15);
        // artanh(0.8) = ln 3 (handbook: artanh x = ln((1 + x)/(1 - x))/2).
        assert!(rel(ru[2], 3f64.ln()) < 1e-15);
        for x in [[1.0, -2.0, 0.5], [0.3 * C, -0.4 * C, 0.5 * C], [0.0, 0.0, 0.0]] {
            let back = velocity_from_rapidity(&l, &rapidity(&l, &x).unwrap());
            for i in 0..3 {
                assert!((back[i] - x[i]).abs() <= 1e-15 * norm(&x), "{x:?} -> {back:?}");
            }
        }
        // Huge rapidities: the speed rounds to c in float64; the result is the
        // largest speed below c along w, a valid velocity.
        for w in [[40.0, 0.0, 0.0], [1e300, 1e300, 0.0]] {
            let v = velocity_from_rapidity(&l, &w);
            assert!(lorentz_factor(&l, &v).is_ok(), "{v:?}");
            assert!(rel(norm(&v), C) < 1e-15);
        }
    }

    #[test]
    fn rotation_is_the_klein_gyration_and_orthogonal() {
        let l = light();
        let (u, v) = ([0.3 * C, 0.5 * C, -0.1 * C], [-0.6 * C, 0.2 * C, 0.35 * C]);
        let m = thomas_rotation(&l, &u, &v).unwrap();
        // Shared identity: columns are the Klein gyration of e_j in the ball of radius c.
        let ball = Curvature::from_radius(C).unwrap();
        for j in 0..3 {
            let mut e = [0.0; 3];
            e[j] = 1.0;
            let mut g = [0.0; 3];
            klein::gyration(&ball, &u, &v, &e, &mut g);
            for i in 0..3 {
                assert!((m[i][j] - g[i]).abs() < 1e-15);
            }
        }
        // Orthogonal with det +1 (a rotation).
        for i in 0..3 {
            for j in 0..3 {
                let d: f64 = (0..3).map(|k| m[k][i] * m[k][j]).sum();
                assert!((d - if i == j { 1.0 } else { 0.0 }).abs() < 1e-15);
            }
        }
        let det = m[0][0] * (m[1][1] * m[2][2] - m[1][2] * m[2][1]) - m[0][1] * (m[1][0] * m[2][2] - m[1][2] * m[2][0])
            + m[0][2] * (m[1][0] * m[2][1] - m[1][1] * m[2][0]);
        assert!((det - 1.0).abs() < 1e-15);
    }

    #[test]
    fn axis_and_angle_reproduce_the_rotation_matrix() {
        // Rodrigues' formula (handbook): R = I + sin e K + (1 - cos e) K^2
        // for the right-handed rotation by e about the unit axis n.
        let l = light();
        for (u, v) in [
            ([0.3 * C, 0.5 * C, -0.1 * C], [-0.6 * C, 0.2 * C, 0.35 * C]),
            ([0.9 * C, 0.0, 0.0], [0.0, 0.9 * C, 0.0]),
            ([0.99 * C, 0.1 * C, 0.0], [-0.98 * C, 0.0, 0.15 * C]),
        ] {
            let m = thomas_rotation(&l, &u, &v).unwrap();
            let e = wigner_angle(&l, &u, &v).unwrap();
            let n = wigner_axis(&l, &u, &v).unwrap();
            let k = [[0.0, -n[2], n[1]], [n[2], 0.0, -n[0]], [-n[1], n[0], 0.0]];
            for i in 0..3 {
                for j in 0..3 {
                    let k2: f64 = (0..3).map(|p| k[i][p] * k[p][j]).sum();
                    let r = if i == j { 1.0 } else { 0.0 } + e.sin() * k[i][j] + (1.0 - e.cos()) * k2;
                    assert!((r - m[i][j]).abs() < 1e-14, "{u:?} {v:?} ({i},{j}): {r} vs {}", m[i][j]);
                }
            }
            // And the trace route agrees where it is well conditioned.
            let tr = m[0][0] + m[1][1] + m[2][2];
            assert!((((tr - 1.0) / 2.0).acos() - e).abs() < 1e-7);
        }
        // Parallel velocities: identity, no axis.
        assert_eq!(wigner_angle(&l, &[1e8, 0.0, 0.0], &[-2e8, 0.0, 0.0]).unwrap(), 0.0);
        assert_eq!(wigner_axis(&l, &[1e8, 0.0, 0.0], &[-2e8, 0.0, 0.0]).unwrap(), [0.0; 3]);
    }

    #[test]
    fn slow_velocities_give_the_small_angle_limit() {
        // From memory: e ~ |u x v|/(2 c^2) for slow velocities; the next term
        // is O(beta^2) relative (1e-11 at 1000 m/s).
        let l = light();
        for s in [1.0, 1000.0] {
            let (u, v) = ([s, 0.0, 0.0], [0.3 * s, 0.8 * s, -0.2 * s]);
            let e = wigner_angle(&l, &u, &v).unwrap();
            let want = 0.8 * s * s / (2.0 * C * C) * (1.0f64 + 0.04 / 0.64).sqrt();
            assert!(rel(e, want) < 1e-9, "{s}: {e} vs {want}");
            assert!(e > 0.0);
        }
    }

    #[test]
    fn boost_product_splits_into_composition_and_rotation() {
        // B(u) B(v) = B(u ⊕ v) diag(1, gyr[u, v]) (Lorentz group polar
        // decomposition; the order was checked against scipy.linalg.polar in
        // the Python tests).
        let l = light();
        let (u, v) = ([0.3 * C, 0.5 * C, -0.1 * C], [-0.6 * C, 0.2 * C, 0.35 * C]);
        let p = mat4_mul(&boost(&l, &u).unwrap(), &boost(&l, &v).unwrap());
        let w = compose(&l, &u, &v).unwrap();
        let m = thomas_rotation(&l, &u, &v).unwrap();
        let mut r4 = [[0.0; 4]; 4];
        r4[0][0] = 1.0;
        for i in 0..3 {
            for j in 0..3 {
                r4[i + 1][j + 1] = m[i][j];
            }
        }
        let q = mat4_mul(&boost(&l, &w).unwrap(), &r4);
        for i in 0..4 {
            for j in 0..4 {
                assert!((p[i][j] - q[i][j]).abs() < 1e-14 * p[0][0], "({i},{j}) {} vs {}", p[i][j], q[i][j]);
            }
        }
        // Boosts are symmetric bit for bit and preserve the Minkowski form.
        let b = boost(&l, &[0.99 * C, -0.05 * C, 0.01 * C]).unwrap();
        for i in 0..4 {
            for j in 0..4 {
                assert_eq!(b[i][j], b[j][i]);
                let eta: f64 = (0..4).map(|k| if k == 0 { b[k][i] * b[k][j] } else { -b[k][i] * b[k][j] }).sum();
                let want = if i != j {
                    0.0
                } else if i == 0 {
                    1.0
                } else {
                    -1.0
                };
                assert!((eta - want).abs() < 1e-12 * b[0][0] * b[0][0]);
            }
        }
    }

    #[test]
    fn precession_is_the_limit_of_rest_frame_gyrations() {
        // The rest frame at t + dt is B(v) B(dv') with dv' = ⊖v ⊕ (v + a dt),
        // = B(v + a dt) gyr[v, dv']: omega_T dt is the rotation vector of
        // gyr[v, dv'] (textbook form of omega_T, from memory). Central
        // difference over +-dt removes the O(dt) term.
        let l = light();
        let v = [0.3 * C, 0.5 * C, -0.2 * C];
        let a = [3e13, -1.2e14, 9e13];
        let om = thomas_precession(&l, &v, &a).unwrap();
        let dt = 1e-9;
        let rot = |h: f64| {
            let w = [v[0] + a[0] * h, v[1] + a[1] * h, v[2] + a[2] * h];
            let dv = compose(&l, &[-v[0], -v[1], -v[2]], &w).unwrap();
            let e = wigner_angle(&l, &v, &dv).unwrap();
            let n = wigner_axis(&l, &v, &dv).unwrap();
            [e * n[0], e * n[1], e * n[2]]
        };
        let (p, m) = (rot(dt), rot(-dt));
        for i in 0..3 {
            let fd = (p[i] - m[i]) / (2.0 * dt);
            assert!((fd - om[i]).abs() < 1e-6 * norm(&om), "{i}: {fd} vs {}", om[i]);
        }
        // Retrograde for circular motion (a points inward): omega . (r x v) < 0.
        let om = thomas_precession(&l, &[0.0, 0.5 * C, 0.0], &[-1e15, 0.0, 0.0]).unwrap();
        assert!(om[2] < 0.0);
    }

    #[test]
    fn scaling_by_a_power_of_two_is_exact() {
        // The kernels work on velocities scaled so that c is in [1, 2): units
        // differing by a power of two must give bit-identical results.
        let (a, b) = (Light::new(1.5).unwrap(), Light::new(1.5 * 2f64.powi(40)).unwrap());
        let s = 2f64.powi(40);
        let (u, v) = ([0.3, -0.7, 0.9], [1.1, 0.2, -0.4]);
        let (us, vs) = (u.map(|x| x * s), v.map(|x| x * s));
        assert_eq!(compose(&a, &u, &v).unwrap().map(|x| x * s), compose(&b, &us, &vs).unwrap());
        assert_eq!(wigner_angle(&a, &u, &v).unwrap(), wigner_angle(&b, &us, &vs).unwrap());
        assert_eq!(gamma_minus_one(&a, &u).unwrap(), gamma_minus_one(&b, &us).unwrap());
        // Tiny c: sums of squares would underflow without the scaling.
        let t = Light::new(1e-150).unwrap();
        let g = gamma_minus_one(&t, &[6e-151, 0.0, 0.0]).unwrap();
        assert!(rel(g, 0.25) < 1e-15, "{g}"); // gamma(0.6 c) = 1.25
    }

    #[test]
    fn bad_velocities_are_faults_not_panics() {
        let l = light();
        assert_eq!(lorentz_factor(&l, &[C, 0.0, 0.0]), Err(Fault::AtOrAboveLight(0.0)));
        assert!(
            matches!(compose(&l, &[0.0; 3], &[0.0, 2.0 * C, 0.0]), Err(Fault::AtOrAboveLight(e)) if (e - 1.0).abs() < 1e-15)
        );
        assert_eq!(boost(&l, &[f64::NAN, 0.0, 0.0]), Err(Fault::NonFinite));
        assert_eq!(rapidity(&l, &[1e300, 1e300, 0.0]).unwrap_err(), Fault::AtOrAboveLight(f64::INFINITY));
        // omega ~ a/c: 1e300 m/s^2 at c = 1e-10 is beyond float64.
        let t = Light::new(1e-10).unwrap();
        assert_eq!(thomas_precession(&t, &[0.5e-10, 0.0, 0.0], &[0.0, 1e300, 0.0]).unwrap_err(), Fault::Overflow);
        assert!(thomas_precession(&l, &[0.5 * C, 0.0, 0.0], &[0.0, 1e300, 0.0]).is_ok());
        assert!(Light::new(0.0).is_err() && Light::new(f64::INFINITY).is_err() && Light::new(-3.0).is_err());
    }

    #[test]
    fn batched_forms_report_the_first_bad_row_and_broadcast() {
        let l = light();
        let u = ArrayD::from_shape_vec(IxDyn(&[3, 3]), vec![1.0, 2.0, 3.0, 0.0, 0.0, 0.0, 4.0, 5.0, 6.0]).unwrap();
        let v = ArrayD::from_shape_vec(IxDyn(&[3]), vec![0.0, 1e8, 0.0]).unwrap();
        let out = compose_arrays(l, Data::F64(u.view()), Data::F64(v.view())).unwrap();
        assert_eq!(out.shape(), &[3, 3]);
        let out = thomas_rotation_arrays(l, Data::F64(u.view()), Data::F64(v.view())).unwrap();
        assert_eq!(out.shape(), &[3, 3, 3]);
        let out = boost_arrays(l, Data::F64(u.view())).unwrap();
        assert_eq!(out.shape(), &[3, 4, 4]);
        let mut bad = u.clone();
        bad[[2, 1]] = 3e8;
        let e = wigner_angle_arrays(l, Data::F64(v.view()), Data::F64(bad.view())).unwrap_err();
        assert!(e.to_string().starts_with("v: row 2 has speed at or above c"), "{e}");
        let two = ArrayD::<f64>::zeros(IxDyn(&[4, 2]));
        let e = lorentz_factor_arrays(l, Data::F64(two.view())).unwrap_err();
        assert!(e.to_string().contains("3-vectors"), "{e}");
    }
}
