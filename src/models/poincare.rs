//! The Poincaré ball: the Möbius gyrovector space of curvature K = -kappa.
//!
//! Every formula is written around `s = x + y` and the carried gaps
//! `g = 1 - kappa |x|^2` (see `numeric`), not in the textbook arrangement:
//! the textbook forms cancel catastrophically for `x ⊖ y` with `x ≈ y` near
//! the boundary, exactly where embedding data sits. Each function comes as a
//! per-point `*_g` form taking precomputed gaps (used by composite
//! operations and by the Klein model), a per-point convenience form, and a
//! batched form over arrays.

use crate::batch::{finite_scalar, map_rows, map_rows_with, point_core, scalar_core, Data, Operand, Output};
use crate::error::{Result, RowFault};
use crate::models::ball::{check_finite, keep_inside, Curvature};
use crate::numeric::{
    artanh_from_gap, diff_of_squares, dist_sq, distance_from_half_delta, dot2, gap, gap_dd, geodesic_weights,
    radial_scale_factor, sumsq,
};

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
pub fn gyration_s(c: &Curvature, u: &[f64], gu: f64, v: &[f64], gv: f64, s: &[f64], w: &[f64], out: &mut [f64]) {
    // The map is linear in w: work on w scaled by a power of two (exact) so
    // that intermediate products cannot overflow for |w| near f64::MAX or
    // lose digits to underflow for tiny w.
    let e = scale_exponent(w);
    let (up, down) = (pow2(-e), pow2(e));
    let k = c.kappa;
    let ss = sumsq(s);
    let mut sw = 0.0;
    let mut vw = 0.0;
    with_scratch(
        w.len(),
        #[inline(always)]
        |ws| {
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
        },
    );
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

/// The exponent `e` with `m / 2^e` in [0.5, 1) for finite `m > 0`.
#[inline(always)]
pub(crate) fn scale_exponent_of(m: f64) -> i32 {
    let bits = m.to_bits();
    let raw = ((bits >> 52) & 0x7ff) as i32;
    if raw == 0 {
        -1021 - (bits.leading_zeros() as i32 - 12)
    } else {
        raw - 1022
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
    with_scratch(
        u.len(),
        #[inline(always)]
        |s| {
            for i in 0..u.len() {
                s[i] = u[i] + v[i];
            }
            gyration_s(c, u, gu, v, gv, s, w, out);
        },
    )
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
    with_scratch(
        a.len(),
        #[inline(always)]
        |t| {
            for i in 0..a.len() {
                t[i] = a[i] - b[i];
            }
            dab = sumsq(t);
        },
    );
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

// ------------------------------------------------------- model layer

/// Hyperbolic distance `d = 2R asinh(sqrt(kappa |x - y|^2 / (g_x g_y)))`:
/// `cosh(d/R) = 1 + 2 kappa |x - y|^2/(g_x g_y)` (the Poincaré distance
/// formula) taken through asinh, so that points 1e-12 apart keep their
/// digits, with `x - y` formed from the inputs and the gaps carried.
#[inline(always)]
pub fn distance_g(c: &Curvature, x: &[f64], gx: f64, y: &[f64], gy: f64) -> f64 {
    distance_from_half_delta(c.radius, c.kappa * dist_sq(x, y) / (gx * gy))
}

/// Hyperbolic distance between two ball points.
pub fn distance(c: &Curvature, x: &[f64], y: &[f64]) -> f64 {
    distance_g(c, x, gap(c.kappa, x), y, gap(c.kappa, y))
}

/// The exponential map `exp_x(v)`, through the ideal endpoint of the
/// geodesic instead of `x ⊕ tanh(sqrt(kappa)|v|/g_x) v/(sqrt(kappa)|v|)`
/// (that composition rounds a point within e^{-2s} of the sphere and then
/// subtracts, losing up to ~1e-9 for 20-30 R tangents).
///
/// On the hyperboloid, `exp_x(s u) = e^{-s} x + sinh(s) l` with the null
/// vector `l = x + u` pointing at the endpoint `xi = x ⊕ R v/|v|` on the
/// sphere. In the unit ball (`p = sqrt(kappa) x`, gap `g`) this becomes
/// `y = (p (2 e^{-s} + sinh(s) |σ|^2) + g sinh(s) σ) / (g + e^{-s} (2 - g) + sinh(s) |σ|^2)`
/// with `σ = p + v/|v|` and `s = 2 sqrt(kappa) |v| / g`. `σ` cancels when `v`
/// points back through the origin, so it is formed in double-double from
/// the inputs (`(sqrt(kappa) |v| x + v) / |v|`). Every other term is a sum
/// of non-negative parts.
#[inline(always)]
pub fn exp_map_g(c: &Curvature, x: &[f64], gx: f64, v: &[f64], out: &mut [f64]) -> f64 {
    use crate::numeric::{sumsq_dd, DD};
    let n2 = sumsq_dd(v);
    if n2.hi == 0.0 {
        out.copy_from_slice(x);
        return gx;
    }
    // |v| and sqrt(kappa) |v| in double-double (one Newton step on each sqrt).
    let dd_sqrt = |q: DD| -> DD {
        let h = q.hi.sqrt();
        let (p, e) = crate::numeric::two_prod(h, h);
        DD::new(h, ((q.hi - p) - e + q.lo) / (2.0 * h))
    };
    let nv = dd_sqrt(n2);
    let snv = dd_sqrt(n2.mul_f64(c.kappa)); // sqrt(kappa) |v|
    let s = 2.0 * snv.hi / gx;
    let mut ss = 0.0;
    for i in 0..x.len() {
        // σ_i = (sqrt(kappa)|v| x_i + v_i) / |v|, numerator in double-double
        let num = snv.mul_f64(x[i]).add(DD::from(v[i]));
        let si = num.value() / nv.value();
        out[i] = si;
        ss += si * si;
    }
    // Divide numerator and denominator by sinh(s): 1/sinh(s) = 2e^{-s}/(1 - e^{-2s}).
    let em = (-s).exp();
    let inv_sh = 2.0 * em / -(-2.0 * s).exp_m1();
    let cp = 2.0 * em * inv_sh + ss; // (2 e^{-s})/sinh(s) + |σ|^2
    let den = (gx + em * (2.0 - gx)) * inv_sh + ss;
    let sk = c.sqrt_kappa;
    for i in 0..x.len() {
        // unit-ball result, then back to radius R
        out[i] = (cp * (sk * x[i]) + gx * out[i]) / den / sk;
    }
    // gap of the result, for callers that chain (recomputed: the result is
    // a fresh point whose coordinates are final)
    crate::numeric::gap(c.kappa, out)
}

/// The logarithmic map `log_x(y) = g_x artanh(sqrt(kappa)|u|) u / (sqrt(kappa)|u|)`,
/// `u = (-x) ⊕ y`, with `artanh` taken from the exact gap of `u`
/// (`g_x g_y / D`), never from `1 - |u|`.
#[inline(always)]
pub fn log_map_g(c: &Curvature, x: &[f64], gx: f64, y: &[f64], gy: f64, out: &mut [f64]) {
    // (-x) ⊕ y = -(x ⊖ y): Möbius addition is odd.
    let gu = add_g(c, x, gx, y, gy, -1.0, out);
    let t = c.sqrt_kappa * sumsq(out).sqrt();
    if t == 0.0 {
        out.iter_mut().for_each(|o| *o = 0.0);
        return;
    }
    let f = -gx * artanh_from_gap(t, gu) / t;
    out.iter_mut().for_each(|o| *o *= f);
}

/// Parallel transport of `v` from `x` to `y` along the geodesic:
/// `(g_y/g_x) gyr[y, ⊖x] v` (the conformal factor ratio times the gyration),
/// with `y - x` formed from the inputs.
#[inline(always)]
pub fn transport_g(c: &Curvature, x: &[f64], gx: f64, y: &[f64], gy: f64, v: &[f64], out: &mut [f64]) {
    let n = x.len();
    with_scratch(
        2 * n,
        #[inline(always)]
        |buf| {
            let (nx, s) = buf.split_at_mut(n);
            for i in 0..n {
                nx[i] = -x[i];
                s[i] = y[i] - x[i];
            }
            gyration_s(c, y, gy, nx, gx, s, v, out);
        },
    );
    let r = gy / gx;
    out.iter_mut().for_each(|o| *o *= r);
}

/// The point at fraction `t` of the geodesic from `x` to `y` (equal to
/// `x ⊕ (t ⊗ ((-x) ⊕ y))`), in closed form through the hyperboloid: with
/// `(a, b)` the geodesic weights of `D = d(x, y)/R`,
/// `p = 2 (a g_y x + b g_x y) / (g_x g_y + a (2 - g_x) g_y + b (2 - g_y) g_x)`.
/// For `t` in [0, 1] every term is non-negative except where the result is
/// near the origin, so no intermediate point near the sphere is ever rounded
/// (the composition form rounds `(-x) ⊕ y`, which can sit 1e-24 from it).
#[inline(always)]
pub fn geodesic_g(c: &Curvature, x: &[f64], gx: f64, y: &[f64], gy: f64, t: f64, out: &mut [f64]) {
    let h = c.kappa * dist_sq(x, y) / (gx * gy);
    let (a, b) = geodesic_weights(t, 2.0 * h.sqrt().asinh());
    let (ca, cb) = (a * gy, b * gx);
    let den = gx * gy + ca * (2.0 - gx) + cb * (2.0 - gy);
    let (fa, fb) = (2.0 * ca / den, 2.0 * cb / den);
    for i in 0..x.len() {
        out[i] = fa * x[i] + fb * y[i];
    }
}

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
    let q = (1.0 - g.value()).sqrt(); // |x|/R
    let mut f = lim / q;
    loop {
        for (o, &xi) in out.iter_mut().zip(x) {
            *o = f * xi;
        }
        if gap_dd(c.kappa, out).hi > 0.0 {
            break;
        }
        // Rounding landed on the sphere: step inward by one ulp of f.
        f = f64::from_bits(f.to_bits() - 1);
    }
}

/// The Möbius matrix-vector product `M ⊗ x = R tanh(|Mx|/|x| artanh(|x|/R))
/// Mx/|Mx|` (zero when `Mx = 0`); `m` is row-major `(d_out, d_in)`. Results
/// within 1.1e-16 R of the sphere are not representable and round onto it.
#[inline(always)]
pub fn matvec_g(c: &Curvature, m: &[f64], x: &[f64], gx: f64, out: &mut [f64]) {
    let din = x.len();
    for (o, row) in out.iter_mut().zip(m.chunks_exact(din)) {
        *o = dot2(row, x);
    }
    let nmx = sumsq(out).sqrt();
    let nx = sumsq(x).sqrt();
    let t = c.sqrt_kappa * nx;
    if nmx == 0.0 || t == 0.0 {
        out.iter_mut().for_each(|o| *o = 0.0);
        return;
    }
    let a = artanh_from_gap(t, gx);
    let f = c.radius * (nmx / nx * a).tanh() / nmx;
    out.iter_mut().for_each(|o| *o *= f);
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
        $crate::models::ball::checked_gap($c, $row).map_err(|f| $crate::error::RowFault::new($arg, f))?.value()
    };
}
pub(crate) use gap_of;

/// The batched forms shared by the two ball models, written once. Invoked
/// inside `poincare` and `klein`, where the unqualified per-point kernels
/// (`add_g`, `scale_g`, `gyration_g`, `midpoint_g`, `distance_g`,
/// `exp_map_g`, `log_map_g`, `transport_g`, `geodesic_g`) resolve to that
/// model's own. The work figures only size parallel chunks.
macro_rules! ball_batched {
    () => {
        fn add_like<'a>(c: Curvature, x: Data<'a>, y: Data<'a>, sy: f64) -> Result<Output> {
            let ops = [Operand::point("x", x), Operand::point("y", y)];
            map_rows(
                &ops,
                &point_core,
                16,
                #[inline(always)]
                |r, out| {
                    let gx = gap_of!(&c, r[0], 0);
                    let gy = gap_of!(&c, r[1], 1);
                    add_g(&c, r[0], gx, r[1], gy, sy, out);
                    keep_inside(&c, out);
                    Ok(())
                },
            )
        }

        /// Batched `x ⊕ y` over broadcast leading axes.
        pub fn add_arrays<'a>(c: Curvature, x: Data<'a>, y: Data<'a>) -> Result<Output> {
            add_like(c, x, y, 1.0)
        }

        /// Batched `x ⊖ y`.
        pub fn sub_arrays<'a>(c: Curvature, x: Data<'a>, y: Data<'a>) -> Result<Output> {
            add_like(c, x, y, -1.0)
        }

        /// Batched `r ⊗ x`; `r` broadcasts against the leading axes of `x`.
        pub fn scale_arrays<'a>(c: Curvature, r: Data<'a>, x: Data<'a>) -> Result<Output> {
            let ops = [Operand::scalar("r", r), Operand::point("x", x)];
            map_rows(
                &ops,
                &point_core,
                12,
                #[inline(always)]
                |rows, out| {
                    let r = finite_scalar(0, rows[0][0])?;
                    let gx = gap_of!(&c, rows[1], 1);
                    scale_g(&c, r, rows[1], gx, out);
                    keep_inside(&c, out);
                    Ok(())
                },
            )
        }

        /// Batched `gyr[a, b] v`; `v` is any finite vector (gyrations are linear).
        pub fn gyration_arrays<'a>(c: Curvature, a: Data<'a>, b: Data<'a>, v: Data<'a>) -> Result<Output> {
            let ops = [Operand::point("a", a), Operand::point("b", b), Operand::point("v", v)];
            map_rows(
                &ops,
                &point_core,
                40,
                #[inline(always)]
                |r, out| {
                    let ga = gap_of!(&c, r[0], 0);
                    let gb = gap_of!(&c, r[1], 1);
                    check_finite(r[2]).map_err(|f| $crate::error::RowFault::new(2, f))?;
                    gyration_g(&c, r[0], ga, r[1], gb, r[2], out);
                    Ok(())
                },
            )
        }

        /// Batched midpoint of `x` and `y`.
        pub fn midpoint_arrays<'a>(c: Curvature, x: Data<'a>, y: Data<'a>) -> Result<Output> {
            let ops = [Operand::point("x", x), Operand::point("y", y)];
            map_rows(
                &ops,
                &point_core,
                30,
                #[inline(always)]
                |r, out| {
                    let gx = gap_of!(&c, r[0], 0);
                    let gy = gap_of!(&c, r[1], 1);
                    midpoint_g(&c, r[0], gx, r[1], gy, out);
                    keep_inside(&c, out);
                    Ok(())
                },
            )
        }

        /// Batched distance `(..., d), (..., d) -> (...)`.
        pub fn distance_arrays<'a>(c: Curvature, x: Data<'a>, y: Data<'a>) -> Result<Output> {
            let ops = [Operand::point("x", x), Operand::point("y", y)];
            map_rows(
                &ops,
                &scalar_core,
                16,
                #[inline(always)]
                |r, out| {
                    let gx = gap_of!(&c, r[0], 0);
                    let gy = gap_of!(&c, r[1], 1);
                    out[0] = distance_g(&c, r[0], gx, r[1], gy);
                    Ok(())
                },
            )
        }

        /// Batched exponential map; `base = None` is the origin.
        pub fn exp_map_arrays<'a>(c: Curvature, v: Data<'a>, base: Option<Data<'a>>) -> Result<Output> {
            match base {
                None => {
                    let ops = [Operand::point("v", v)];
                    map_rows(
                        &ops,
                        &point_core,
                        16,
                        #[inline(always)]
                        |r, out| {
                            check_finite(r[0]).map_err(|f| $crate::error::RowFault::new(0, f))?;
                            with_scratch(
                                r[0].len(),
                                #[inline(always)]
                                |z| exp_map_g(&c, z, 1.0, r[0], out),
                            );
                            keep_inside(&c, out);
                            Ok(())
                        },
                    )
                }
                Some(b) => {
                    let ops = [Operand::point("v", v), Operand::point("base", b)];
                    map_rows(
                        &ops,
                        &point_core,
                        24,
                        #[inline(always)]
                        |r, out| {
                            check_finite(r[0]).map_err(|f| $crate::error::RowFault::new(0, f))?;
                            let gb = gap_of!(&c, r[1], 1);
                            exp_map_g(&c, r[1], gb, r[0], out);
                            keep_inside(&c, out);
                            Ok(())
                        },
                    )
                }
            }
        }

        /// Batched logarithmic map; `base = None` is the origin.
        pub fn log_map_arrays<'a>(c: Curvature, y: Data<'a>, base: Option<Data<'a>>) -> Result<Output> {
            match base {
                None => {
                    let ops = [Operand::point("y", y)];
                    map_rows(
                        &ops,
                        &point_core,
                        16,
                        #[inline(always)]
                        |r, out| {
                            let gy = gap_of!(&c, r[0], 0);
                            with_scratch(
                                r[0].len(),
                                #[inline(always)]
                                |z| log_map_g(&c, z, 1.0, r[0], gy, out),
                            );
                            Ok(())
                        },
                    )
                }
                Some(b) => {
                    let ops = [Operand::point("y", y), Operand::point("base", b)];
                    map_rows(
                        &ops,
                        &point_core,
                        24,
                        #[inline(always)]
                        |r, out| {
                            let gy = gap_of!(&c, r[0], 0);
                            let gb = gap_of!(&c, r[1], 1);
                            log_map_g(&c, r[1], gb, r[0], gy, out);
                            Ok(())
                        },
                    )
                }
            }
        }

        /// Batched parallel transport of `v` from `start` to `end`.
        pub fn transport_arrays<'a>(c: Curvature, v: Data<'a>, start: Data<'a>, end: Data<'a>) -> Result<Output> {
            let ops = [Operand::point("v", v), Operand::point("start", start), Operand::point("end", end)];
            map_rows(
                &ops,
                &point_core,
                60,
                #[inline(always)]
                |r, out| {
                    check_finite(r[0]).map_err(|f| $crate::error::RowFault::new(0, f))?;
                    let gs = gap_of!(&c, r[1], 1);
                    let ge = gap_of!(&c, r[2], 2);
                    transport_g(&c, r[1], gs, r[2], ge, r[0], out);
                    Ok(())
                },
            )
        }

        /// Batched geodesic interpolation; `t` broadcasts against the leading axes.
        pub fn geodesic_arrays<'a>(c: Curvature, x: Data<'a>, y: Data<'a>, t: Data<'a>) -> Result<Output> {
            let ops = [Operand::point("x", x), Operand::point("y", y), Operand::scalar("t", t)];
            map_rows(
                &ops,
                &point_core,
                30,
                #[inline(always)]
                |r, out| {
                    let gx = gap_of!(&c, r[0], 0);
                    let gy = gap_of!(&c, r[1], 1);
                    let t = finite_scalar(2, r[2][0])?;
                    geodesic_g(&c, r[0], gx, r[1], gy, t, out);
                    keep_inside(&c, out);
                    Ok(())
                },
            )
        }
    };
}
pub(crate) use ball_batched;

ball_batched!();

/// Batched `x ⊞ y`.
pub fn coadd_arrays<'a>(c: Curvature, x: Data<'a>, y: Data<'a>) -> Result<Output> {
    let ops = [Operand::point("x", x), Operand::point("y", y)];
    map_rows(
        &ops,
        &point_core,
        30,
        #[inline(always)]
        |r, out| {
            let gx = gap_of!(&c, r[0], 0);
            let gy = gap_of!(&c, r[1], 1);
            coadd_g(&c, r[0], gx, r[1], gy, out);
            keep_inside(&c, out);
            Ok(())
        },
    )
}

/// Checks a projection margin: finite, in (0, 1), and with `1 - margin < 1`.
pub fn check_margin(margin: f64) -> Result<()> {
    if margin.is_finite() && margin > 0.0 && margin < 1.0 && 1.0 - margin < 1.0 {
        Ok(())
    } else {
        crate::error::value_err(format!(
            "margin must satisfy 1.1e-16 < margin < 1 (so that 1 - margin < 1 in float64), got {margin}"
        ))
    }
}

/// Batched projection into the ball of radius `(1 - margin) R`.
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
            check_finite(r[0]).map_err(|f| RowFault::new(0, f))?;
            project(&c, r[0], margin, out);
            Ok(())
        },
    )
}

/// Batched Möbius matrix-vector product; `m` is `(d_out, d_in)`.
pub fn matvec_arrays<'a>(c: Curvature, m: Data<'a>, x: Data<'a>) -> Result<Output> {
    let ms = m.shape().to_vec();
    if ms.len() != 2 || ms[0] == 0 || ms[1] == 0 {
        return crate::error::value_err(format!(
            "m must be a matrix of shape (d_out, d_in) with d_out, d_in >= 1, got shape {ms:?}"
        ));
    }
    let (dout, din) = (ms[0], ms[1]);
    let mm: Vec<f64> = match &m {
        Data::F64(a) | Data::Weak(a) => a.iter().copied().collect(),
        Data::F32(a) => a.iter().map(|&v| f64::from(v)).collect(),
    };
    if let Some(i) = mm.iter().position(|v| !v.is_finite()) {
        return crate::error::value_err(format!("m: row {} contains NaN or infinity", i / din));
    }
    let xs = x.shape();
    if xs.last().copied() != Some(din) {
        return crate::error::value_err(format!(
            "m has shape ({dout}, {din}) but x has points of dimension {}",
            xs.last().map_or("none".to_string(), |v| v.to_string())
        ));
    }
    let m_f32 = m.is_f32();
    let ops = [Operand::point("x", x)];
    // The dtype policy counts m too: float32 only if m is float32 as well.
    let force_f64 = !m_f32 && !m.is_weak();
    map_rows_with(
        &ops,
        &|_| vec![dout],
        2 * dout + 10,
        force_f64,
        #[inline(always)]
        |r, out| {
            let gx = gap_of!(&c, r[0], 0);
            matvec_g(&c, &mm, r[0], gx, out);
            keep_inside(&c, out);
            Ok(())
        },
    )
}
