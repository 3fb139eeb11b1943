//! The Poincaré ball: the Möbius gyrovector space of curvature K = -kappa.
//!
//! Every formula is written around `s = x + y` and the carried gaps
//! `g = 1 - kappa |x|^2` (see `numeric`), not in the textbook arrangement:
//! the textbook forms cancel catastrophically for `x ⊖ y` with `x ≈ y` near
//! the boundary, exactly where embedding data sits. Each function comes as a
//! per-point `*_g` form taking precomputed gaps (used by composite
//! operations and by the Klein model), a per-point convenience form, and a
//! batched form over arrays.

use crate::batch::{map_rows_with, wants_f32, Data, Operand, Output, Take};
use crate::error::Result;
use crate::models::ball::{point_gap, Curvature, Rim};
use crate::models::gyro::{self, gyro_ball, GyroBall};
use crate::numeric::{
    artanh_from_gap, artanh_ratio, diff_of_squares, dist_sq, dot2, gap, geodesic_weights, norm_scaled, pow2,
    radial_scale_factor, scale_exponent, sech2, sumsq, with_scratch,
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
/// Returns the gap of the result, `g_x g_y (g_x g_y + kappa |x - y|^2) / E^2`
/// (`x ⊞ y = 2 ⊗ m` for the midpoint `m`, see [`midpoint_g`]).
#[inline(always)]
pub fn coadd_g(c: &Curvature, x: &[f64], gx: f64, y: &[f64], gy: f64, out: &mut [f64]) -> f64 {
    let k = c.kappa;
    let ds = diff_of_squares(x, y, 1.0);
    let p = gx * gy;
    let e = gx + gy - p;
    let a = k * ds / e;
    let b = gx / e;
    for i in 0..x.len() {
        out[i] = a * x[i] + b * (x[i] + y[i]);
    }
    p * (p + k * dist_sq(x, y)) / (e * e)
}

/// Möbius coaddition `x ⊞ y`.
pub fn coadd(c: &Curvature, x: &[f64], y: &[f64], out: &mut [f64]) {
    coadd_g(c, x, gap(c.kappa, x), y, gap(c.kappa, y), out);
}

/// Möbius scalar multiplication `r ⊗ x = R tanh(r artanh(|x|/R)) x/|x|`,
/// with `artanh` taken from the gap (no `1 - |x|/R`). Returns the gap of the
/// result, `sech^2(r artanh t)` (`t = |x|/R`): the Einstein scalar
/// multiplication has the same radial law, and the same gap.
#[inline(always)]
pub fn scale_g(c: &Curvature, r: f64, x: &[f64], gx: f64, out: &mut [f64]) -> f64 {
    let t = (c.kappa * sumsq(x)).sqrt();
    let f = radial_scale_factor(r, t, gx);
    for i in 0..x.len() {
        out[i] = f * x[i];
    }
    if t == 0.0 {
        1.0
    } else {
        sech2(r * artanh_from_gap(t, gx))
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
/// coordinates. Returns the gap of the result, `2 sqrt(g_a g_b (g_a g_b +
/// kappa |a - b|^2)) / den` (the gap `2 s/(1 + s)` of `½ ⊗ z` for `z` of gap
/// `s^2`).
#[inline(always)]
pub fn midpoint_g(c: &Curvature, a: &[f64], ga: f64, b: &[f64], gb: f64, out: &mut [f64]) -> f64 {
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
    let root = (p * (p + k * dab)).sqrt();
    let den = e + root;
    let ca = k * ds / den;
    let cs = ga / den;
    for i in 0..a.len() {
        out[i] = ca * a[i] + cs * (a[i] + b[i]);
    }
    2.0 * root / den
}

/// The Möbius gyromidpoint of `a` and `b`.
pub fn midpoint(c: &Curvature, a: &[f64], b: &[f64], out: &mut [f64]) {
    midpoint_g(c, a, gap(c.kappa, a), b, gap(c.kappa, b), out);
}

// ------------------------------------------------------- model layer

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
/// of non-negative parts. Returns the gap of the result, `2 g_x / den`
/// (`2/(1 + y0)` for the hyperboloid image `y0 = e^{-s} x0 + sinh(s) l0`).
#[inline(always)]
pub fn exp_map_g(c: &Curvature, x: &[f64], gx: f64, v: &[f64], out: &mut [f64]) -> f64 {
    use crate::numeric::{sumsq_dd, DD};
    // v scaled by a power of two (exact): the direction v/|v| and sigma do
    // not depend on the scale, and |v| = 2^e |v_s| is kept as the pair
    // (|v_s|, e), so tangents whose squares underflow (below ~1e-154) or
    // overflow keep their digits.
    // (always scaled to a largest coordinate in [0.5, 1): the product
    // kappa |v|^2 must not underflow either; scaling by 2^-e is exact, so an
    // ordinary v gives the same bits as unscaled)
    let e = crate::numeric::unit_exponent(v);
    let up = pow2(-e);
    let n2 = with_scratch(v.len(), |vs| {
        for (o, &a) in vs.iter_mut().zip(v) {
            *o = a * up;
        }
        sumsq_dd(vs)
    });
    if n2.hi == 0.0 {
        out.copy_from_slice(x);
        return gx;
    }
    // |v_s| and sqrt(kappa) |v_s| in double-double (one Newton step on each sqrt).
    let dd_sqrt = |q: DD| -> DD {
        let h = q.hi.sqrt();
        let (p, e) = crate::numeric::two_prod(h, h);
        DD::new(h, ((q.hi - p) - e + q.lo) / (2.0 * h))
    };
    let nv = dd_sqrt(n2);
    let snv = dd_sqrt(n2.mul_f64(c.kappa)); // sqrt(kappa) |v_s|
    let down = pow2(e);
    let s = 2.0 * snv.hi * down / gx;
    let mut ss = 0.0;
    for i in 0..x.len() {
        // σ_i = (sqrt(kappa)|v| x_i + v_i) / |v|, numerator in double-double
        let num = snv.mul_f64(x[i]).add(DD::from(v[i] * up));
        let si = num.value() / nv.value();
        out[i] = si;
        ss += si * si;
    }
    let sk = c.sqrt_kappa;
    if s < 1e-100 {
        // A tangent so short that sinh(s) = s and e^{-s} = 1 in float64:
        // the undivided form, with g sinh(s) σ / sqrt(kappa) = 2 |v| σ formed
        // without the product sqrt(kappa) |v| (which can underflow), and no
        // 1/sinh(s) (which overflows).
        let den = gx + (2.0 - gx) + s * ss;
        let cx = (2.0 + s * ss) / den;
        let cv = 2.0 * nv.value() / den;
        for i in 0..x.len() {
            out[i] = cx * x[i] + (cv * out[i]) * down;
        }
        return 2.0 * gx / den;
    }
    // Divide numerator and denominator by sinh(s): 1/sinh(s) = 2e^{-s}/(1 - e^{-2s}).
    let em = (-s).exp();
    let inv_sh = 2.0 * em / -(-2.0 * s).exp_m1();
    let cp = 2.0 * em * inv_sh + ss; // (2 e^{-s})/sinh(s) + |σ|^2
    let den = (gx + em * (2.0 - gx)) * inv_sh + ss;
    for i in 0..x.len() {
        // unit-ball result, then back to radius R
        out[i] = (cp * (sk * x[i]) + gx * out[i]) / den / sk;
    }
    2.0 * gx * inv_sh / den
}

/// The logarithmic map `log_x(y) = g_x artanh(sqrt(kappa)|u|) u / (sqrt(kappa)|u|)`,
/// `u = (-x) ⊕ y`, with `artanh` taken from the exact gap of `u`
/// (`g_x g_y / D`), never from `1 - |u|`.
#[inline(always)]
pub fn log_map_g(c: &Curvature, x: &[f64], gx: f64, y: &[f64], gy: f64, out: &mut [f64]) {
    // (-x) ⊕ y = -(x ⊖ y): Möbius addition is odd.
    let gu = add_g(c, x, gx, y, gy, -1.0, out);
    if out.iter().all(|&o| o == 0.0) {
        out.iter_mut().for_each(|o| *o = 0.0);
        return;
    }
    // |u| without underflow: tiny pairs (|u|^2 below the float64 range) keep
    // log = -g_x u to full precision.
    let t = c.sqrt_kappa * norm_scaled(out);
    let f = -gx * artanh_ratio(t, gu);
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
/// Returns the gap of the result, `2 g_x g_y / den` (`2/(1 + z0)` for the
/// hyperboloid point `z = a x_H + b y_H`).
#[inline(always)]
pub fn geodesic_g(c: &Curvature, x: &[f64], gx: f64, y: &[f64], gy: f64, t: f64, out: &mut [f64]) -> f64 {
    let h = c.kappa * dist_sq(x, y) / (gx * gy);
    let (a, b) = geodesic_weights(t, 2.0 * h.sqrt().asinh());
    let (ca, cb) = (a * gy, b * gx);
    let den = gx * gy + ca * (2.0 - gx) + cb * (2.0 - gy);
    let (fa, fb) = (2.0 * ca / den, 2.0 * cb / den);
    for i in 0..x.len() {
        out[i] = fa * x[i] + fb * y[i];
    }
    2.0 * gx * gy / den
}

/// The Möbius matrix-vector product `M ⊗ x = R tanh(|Mx|/|x| artanh(|x|/R))
/// Mx/|Mx|` (zero when `Mx = 0`); `m` is row-major `(d_out, d_in)`. Returns
/// the gap of the result, `sech^2(|Mx|/|x| artanh t)`.
#[inline(always)]
pub fn matvec_g(c: &Curvature, m: &[f64], x: &[f64], gx: f64, out: &mut [f64]) -> f64 {
    let din = x.len();
    for (o, row) in out.iter_mut().zip(m.chunks_exact(din)) {
        *o = dot2(row, x);
    }
    if out.iter().all(|&o| o == 0.0) || x.iter().all(|&v| v == 0.0) {
        out.iter_mut().for_each(|o| *o = 0.0);
        return 1.0;
    }
    // norms without underflow, and artanh(t)/t, tanh(a)/a taken to their
    // limit 1 for tiny arguments: tiny points give M x to full precision
    let nmx = norm_scaled(out);
    let nx = norm_scaled(x);
    let t = c.sqrt_kappa * nx;
    let ratio = artanh_ratio(t, gx);
    let a = nmx * c.sqrt_kappa * ratio; // |Mx|/|x| artanh(t)
    let f = if a < 1e-100 { ratio } else { c.radius * a.tanh() / nmx };
    out.iter_mut().for_each(|o| *o *= f);
    sech2(a)
}

// ---------------------------------------------------------------- batched

/// The Möbius gyrovector space of the Poincaré ball, for the batched forms
/// of [`gyro`] (`gyro::add_arrays::<Mobius>`, ...).
#[derive(Clone, Copy, Debug)]
pub struct Mobius;

gyro_ball!(Mobius, "Poincaré");

/// Batched `x ⊞ y`.
pub fn coadd_arrays<'a>(c: Curvature, x: Data<'a>, y: Data<'a>, rim: &Rim) -> Result<Output> {
    let args = [("x", x, Take::Point), ("y", y, Take::Point)];
    gyro::ball_rows::<Mobius, 2>(
        c,
        args,
        30,
        Some(rim),
        #[inline(always)]
        |r, g, out| coadd_g(&c, r[0], g[0], r[1], g[1], out),
    )
}

/// Batched Möbius matrix-vector product; `m` is `(d_out, d_in)`.
pub fn matvec_arrays<'a>(c: Curvature, m: Data<'a>, x: Data<'a>, rim: &Rim) -> Result<Output> {
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
    let f32_out = wants_f32(&ops) && !force_f64;
    map_rows_with(
        &ops,
        &|_| vec![dout],
        2 * dout + 10,
        force_f64,
        #[inline(always)]
        |r, out| {
            let gx = point_gap(&c, r[0], 0)?;
            let g = matvec_g(&c, &mm, r[0], gx, out);
            rim.apply(&c, out, g, f32_out, Mobius::NAME, 0)
        },
    )
}
