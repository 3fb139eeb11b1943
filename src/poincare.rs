//! The Poincaré ball: the Möbius gyrovector space of curvature K = -kappa.
//!
//! Every formula is written around `s = x + y` and the carried gaps
//! `g = 1 - kappa |x|^2` (see `numeric`), not in the textbook arrangement:
//! the textbook forms cancel catastrophically for `x ⊖ y` with `x ≈ y` near
//! the boundary, exactly where embedding data sits. Each function comes as a
//! per-point `*_g` form taking precomputed gaps (used by composite
//! operations and by the Klein model), a per-point convenience form, and a
//! batched form over arrays.

use crate::ball::{check_finite, checked_gap, Curvature};
use crate::batch::{finite_scalar, map_rows, Data, Operand, Output};
use crate::error::{Result, RowFault};
use crate::numeric::{diff_of_squares, dot2, gap, radial_scale_factor, sumsq};

/// `x ⊕ (sy y)` (Möbius addition; `sy = -1` gives `x ⊖ y`). Returns the gap
/// of the result, `g_x g_y / D`, exact to rounding.
///
/// With `s = x + y`: `D = g_x g_y + kappa |s|^2 = 1 + 2 kappa x.y + kappa^2
/// |x|^2 |y|^2` and the numerator `g_x s + kappa |s|^2 x` equals the
/// textbook `(1 + 2 kappa x.y + kappa |y|^2) x + g_x y`; both are sums of
/// terms without cancellation when `x ≈ -y`.
#[inline(always)]
pub fn add_g(c: &Curvature, x: &[f64], gx: f64, y: &[f64], gy: f64, sy: f64, out: &mut [f64]) -> f64 {
    let k = c.kappa;
    for ((o, &a), &b) in out.iter_mut().zip(x).zip(y) {
        *o = a + sy * b;
    }
    let ss = sumsq(out);
    let den = gx * gy + k * ss;
    let a = gx / den;
    let b = k * ss / den;
    for (o, &xi) in out.iter_mut().zip(x) {
        *o = a * *o + b * xi;
    }
    gx * gy / den
}

/// Möbius addition `x ⊕ y` of two points inside the ball.
pub fn add(c: &Curvature, x: &[f64], y: &[f64], out: &mut [f64]) {
    add_g(c, x, gap(c.kappa, x), y, gap(c.kappa, y), 1.0, out);
}

/// Möbius subtraction `x ⊖ y = x ⊕ (-y)`.
pub fn sub(c: &Curvature, x: &[f64], y: &[f64], out: &mut [f64]) {
    add_g(c, x, gap(c.kappa, x), y, gap(c.kappa, y), -1.0, out);
}

/// Möbius coaddition `x ⊞ y = (g_y x + g_x y) / (g_x + g_y - g_x g_y)`,
/// commutative. The numerator is rewritten as
/// `kappa (|x|^2 - |y|^2) x + g_x s` with `|x|^2 - |y|^2 = (x - y).(x + y)`
/// formed error-free: when both points are near the boundary the
/// denominator is tiny and the numerator must carry all its digits.
#[inline(always)]
pub fn coadd_g(c: &Curvature, x: &[f64], gx: f64, y: &[f64], gy: f64, out: &mut [f64]) {
    let k = c.kappa;
    let ds = diff_of_squares(x, y, 1.0);
    let e = gx + gy - gx * gy;
    let a = k * ds / e;
    let b = gx / e;
    for i in 0..x.len() {
        out[i] = a * x[i] + b * (x[i] + y[i]);
    }
}

/// Möbius coaddition `x ⊞ y`.
pub fn coadd(c: &Curvature, x: &[f64], y: &[f64], out: &mut [f64]) {
    coadd_g(c, x, gap(c.kappa, x), y, gap(c.kappa, y), out);
}

/// Möbius scalar multiplication `r ⊗ x = R tanh(r artanh(|x|/R)) x/|x|`,
/// with `artanh` taken from the gap (no `1 - |x|/R`). Returns the gap of the
/// result. Results farther than about 18.4 R from the origin round onto the
/// sphere in float64 (1 - |r ⊗ x|/R < 1.1e-16 is not representable).
#[inline(always)]
pub fn scale_g(c: &Curvature, r: f64, x: &[f64], gx: f64, out: &mut [f64]) {
    let t = (c.kappa * sumsq(x)).sqrt();
    let f = radial_scale_factor(r, t, gx);
    for i in 0..x.len() {
        out[i] = f * x[i];
    }
}

/// Möbius scalar multiplication `r ⊗ x`.
pub fn scale(c: &Curvature, r: f64, x: &[f64], out: &mut [f64]) {
    scale_g(c, r, x, gap(c.kappa, x), out);
}

/// The gyration `gyr[u, v] w` given `s = u + v` (computed by the caller as
/// accurately as it can). Derived from the closed form
/// `w + 2 (A u + B v) / D` (Ungar, *Analytic Hyperbolic Geometry*, 2005,
/// eq. for Möbius gyrations) by substituting `v = s - u`:
/// `A - B = kappa g_v (s.w) + kappa^2 |s|^2 (v.w)`,
/// `B = kappa g_u (v.w) - kappa (s.w)`, `D = g_u g_v + kappa |s|^2`,
/// which keeps its digits when `v ≈ -u` near the boundary.
#[inline(always)]
pub fn gyration_s(
    c: &Curvature,
    u: &[f64],
    gu: f64,
    v: &[f64],
    gv: f64,
    s: &[f64],
    w: &[f64],
    out: &mut [f64],
) {
    // The map is linear in w: work on w scaled by a power of two (exact) so
    // that intermediate products cannot overflow for |w| near f64::MAX or
    // lose digits to underflow for tiny w.
    let e = scale_exponent(w);
    let (up, down) = (pow2(-e), pow2(e));
    let k = c.kappa;
    let ss = sumsq(s);
    let mut sw = 0.0;
    let mut vw = 0.0;
    with_scratch(w.len(), |ws| {
        for (o, &x) in ws.iter_mut().zip(w) {
            *o = x * up;
        }
        sw = dot2(s, ws);
        vw = dot2(v, ws);
        let den = gu * gv + k * ss;
        let cu = 2.0 * (k * gv * sw + k * k * ss * vw) / den;
        let cs = 2.0 * (k * gu * vw - k * sw) / den;
        for i in 0..w.len() {
            out[i] = (ws[i] + (cu * u[i] + cs * s[i])) * down;
        }
    });
}

/// The exponent `e` with `max |w_i| / 2^e` in [0.5, 1) when `w` is very
/// large or very small, else 0 (no scaling for ordinary vectors).
#[inline(always)]
pub(crate) fn scale_exponent(w: &[f64]) -> i32 {
    let m = w.iter().fold(0.0f64, |a, &b| a.max(b.abs()));
    if (1e-150..=1e150).contains(&m) || m == 0.0 {
        0
    } else {
        // frexp: m = f 2^e with f in [0.5, 1).
        let bits = m.to_bits();
        let raw = ((bits >> 52) & 0x7ff) as i32;
        if raw == 0 {
            // subnormal
            -1021 - (m.to_bits().leading_zeros() as i32 - 12)
        } else {
            raw - 1022
        }
    }
}

/// `2^e` exactly, for |e| <= 1022.
#[inline(always)]
pub(crate) fn pow2(e: i32) -> f64 {
    let e = e.clamp(-1022, 1023);
    f64::from_bits(((e + 1023) as u64) << 52)
}

/// `gyr[u, v] w` for points `u`, `v` with gaps `gu`, `gv`.
#[inline(always)]
pub fn gyration_g(c: &Curvature, u: &[f64], gu: f64, v: &[f64], gv: f64, w: &[f64], out: &mut [f64]) {
    with_scratch(u.len(), |s| {
        for i in 0..u.len() {
            s[i] = u[i] + v[i];
        }
        gyration_s(c, u, gu, v, gv, s, w, out);
    })
}

/// The gyration `gyr[u, v] w = ⊖(u ⊕ v) ⊕ (u ⊕ (v ⊕ w))`, a rotation of
/// R^d applied to any vector `w`.
pub fn gyration(c: &Curvature, u: &[f64], v: &[f64], w: &[f64], out: &mut [f64]) {
    gyration_g(c, u, gap(c.kappa, u), v, gap(c.kappa, v), w, out);
}

/// The Möbius gyromidpoint `½ ⊗ (a ⊞ b)` in closed form:
/// `(kappa (|a|^2 - |b|^2) a + g_a s) / (E + sqrt(g_a g_b (g_a g_b + kappa |a - b|^2)))`,
/// `E = g_a + g_b - g_a g_b`. The square root is the exact gap of `a ⊞ b`
/// times `E` (from `1 + cosh d(a, b)`), so no gap is recomputed from rounded
/// coordinates.
#[inline(always)]
pub fn midpoint_g(c: &Curvature, a: &[f64], ga: f64, b: &[f64], gb: f64, out: &mut [f64]) {
    let k = c.kappa;
    let ds = diff_of_squares(a, b, 1.0);
    let mut dab = 0.0;
    with_scratch(a.len(), |t| {
        for i in 0..a.len() {
            t[i] = a[i] - b[i];
        }
        dab = sumsq(t);
    });
    let p = ga * gb;
    let e = ga + gb - p;
    let den = e + (p * (p + k * dab)).sqrt();
    let ca = k * ds / den;
    let cs = ga / den;
    for i in 0..a.len() {
        out[i] = ca * a[i] + cs * (a[i] + b[i]);
    }
}

/// The Möbius gyromidpoint of `a` and `b`.
pub fn midpoint(c: &Curvature, a: &[f64], b: &[f64], out: &mut [f64]) {
    midpoint_g(c, a, gap(c.kappa, a), b, gap(c.kappa, b), out);
}

/// Runs `f` with a zeroed scratch buffer of length `n` (on the stack when
/// small).
#[inline(always)]
pub(crate) fn with_scratch<R>(n: usize, f: impl FnOnce(&mut [f64]) -> R) -> R {
    if n <= 32 {
        let mut buf = [0f64; 32];
        f(&mut buf[..n])
    } else {
        let mut buf = vec![0f64; n];
        f(&mut buf)
    }
}

// ---------------------------------------------------------------- batched

macro_rules! gap_of {
    ($c:expr, $row:expr, $arg:expr) => {
        checked_gap($c, $row).map_err(|f| RowFault::new($arg, f))?.value()
    };
}
pub(crate) use gap_of;

fn point_out(d: usize) -> Vec<usize> {
    vec![d]
}

/// Batched `x ⊕ y` over broadcast leading axes.
pub fn add_arrays<'a>(c: Curvature, x: Data<'a>, y: Data<'a>) -> Result<Output> {
    add_like(c, x, y, 1.0)
}

/// Batched `x ⊖ y`.
pub fn sub_arrays<'a>(c: Curvature, x: Data<'a>, y: Data<'a>) -> Result<Output> {
    add_like(c, x, y, -1.0)
}

fn add_like<'a>(c: Curvature, x: Data<'a>, y: Data<'a>, sy: f64) -> Result<Output> {
    let ops = [Operand::point("x", x), Operand::point("y", y)];
    map_rows(&ops, &point_out, 12, #[inline(always)] |r, out| {
        let gx = gap_of!(&c, r[0], 0);
        let gy = gap_of!(&c, r[1], 1);
        add_g(&c, r[0], gx, r[1], gy, sy, out);
        Ok(())
    })
}

/// Batched `x ⊞ y`.
pub fn coadd_arrays<'a>(c: Curvature, x: Data<'a>, y: Data<'a>) -> Result<Output> {
    let ops = [Operand::point("x", x), Operand::point("y", y)];
    map_rows(&ops, &point_out, 30, #[inline(always)] |r, out| {
        let gx = gap_of!(&c, r[0], 0);
        let gy = gap_of!(&c, r[1], 1);
        coadd_g(&c, r[0], gx, r[1], gy, out);
        Ok(())
    })
}

/// Batched `r ⊗ x`; `r` broadcasts against the leading axes of `x`.
pub fn scale_arrays<'a>(c: Curvature, r: Data<'a>, x: Data<'a>) -> Result<Output> {
    let ops = [Operand::scalar("r", r), Operand::point("x", x)];
    map_rows(&ops, &point_out, 12, #[inline(always)] |rows, out| {
        let r = finite_scalar(0, rows[0][0])?;
        let gx = gap_of!(&c, rows[1], 1);
        scale_g(&c, r, rows[1], gx, out);
        Ok(())
    })
}

/// Batched `gyr[a, b] v`; `v` is any finite vector (gyrations are linear).
pub fn gyration_arrays<'a>(c: Curvature, a: Data<'a>, b: Data<'a>, v: Data<'a>) -> Result<Output> {
    let ops = [Operand::point("a", a), Operand::point("b", b), Operand::point("v", v)];
    map_rows(&ops, &point_out, 30, #[inline(always)] |r, out| {
        let ga = gap_of!(&c, r[0], 0);
        let gb = gap_of!(&c, r[1], 1);
        check_finite(r[2]).map_err(|f| RowFault::new(2, f))?;
        gyration_g(&c, r[0], ga, r[1], gb, r[2], out);
        Ok(())
    })
}

/// Batched gyromidpoint of `x` and `y`.
pub fn midpoint_arrays<'a>(c: Curvature, x: Data<'a>, y: Data<'a>) -> Result<Output> {
    let ops = [Operand::point("x", x), Operand::point("y", y)];
    map_rows(&ops, &point_out, 30, #[inline(always)] |r, out| {
        let gx = gap_of!(&c, r[0], 0);
        let gy = gap_of!(&c, r[1], 1);
        midpoint_g(&c, r[0], gx, r[1], gy, out);
        Ok(())
    })
}
