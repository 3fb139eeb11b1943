//! Shared numerics: error-free transformations, compensated sums and dot
//! products, and transcendental forms that keep their digits where the
//! textbook ones lose them. Every model module uses these; none re-derives
//! them.
//!
//! Notation used across the crate: `kappa = -K > 0`; the ball radius is
//! `R = 1/sqrt(kappa)`; the *gap* of a ball point is `g = 1 - kappa |x|^2`,
//! which goes to zero at the boundary.

pub mod rng;
pub mod simd;

/// Error-free sum (Knuth's TwoSum): `a + b = s + e` exactly.
#[inline(always)]
pub fn two_sum(a: f64, b: f64) -> (f64, f64) {
    let s = a + b;
    let bb = s - a;
    let e = (a - (s - bb)) + (b - bb);
    (s, e)
}

/// Error-free product with a fused multiply-add: `a * b = p + e` exactly.
#[inline(always)]
pub fn two_prod(a: f64, b: f64) -> (f64, f64) {
    let p = a * b;
    let e = a.mul_add(b, -p);
    (p, e)
}

/// A double-double number `hi + lo` with `|lo| <= ulp(hi)/2` (after
/// normalisation); about 32 significant digits.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct DD {
    pub hi: f64,
    pub lo: f64,
}

// Named methods rather than operator traits: every call site reads as the
// explicit double-double operation it is.
#[allow(clippy::should_implement_trait)]
impl DD {
    #[inline(always)]
    pub fn new(hi: f64, lo: f64) -> DD {
        let (h, l) = two_sum(hi, lo);
        DD { hi: h, lo: l }
    }
    #[inline(always)]
    pub fn from(x: f64) -> DD {
        DD { hi: x, lo: 0.0 }
    }
    #[inline(always)]
    pub fn value(self) -> f64 {
        self.hi + self.lo
    }
    #[inline(always)]
    pub fn add(self, o: DD) -> DD {
        let (s, e) = two_sum(self.hi, o.hi);
        DD::new(s, e + self.lo + o.lo)
    }
    #[inline(always)]
    pub fn sub(self, o: DD) -> DD {
        self.add(DD { hi: -o.hi, lo: -o.lo })
    }
    #[inline(always)]
    pub fn mul_f64(self, b: f64) -> DD {
        let (p, e) = two_prod(self.hi, b);
        DD::new(p, e + self.lo * b)
    }
    #[inline(always)]
    pub fn mul(self, o: DD) -> DD {
        let (p, e) = two_prod(self.hi, o.hi);
        DD::new(p, e + (self.hi * o.lo + self.lo * o.hi))
    }
}

/// `a / w` for a float64 `a` and a double-double `w`, to double-double
/// accuracy (one Newton correction of the quotient).
#[inline(always)]
pub fn div_dd(a: f64, w: DD) -> DD {
    let q1 = a / w.hi;
    let (p, pe) = two_prod(q1, w.hi);
    // a - q1 w, exact to the rounding of the small terms: a - p is exact
    // (Sterbenz), pe and q1 w.lo are the error terms.
    let r = ((a - p) - pe) - q1 * w.lo;
    let q2 = r / w.hi;
    let (h, l) = two_sum(q1, q2);
    DD { hi: h, lo: l }
}

/// `sqrt(g)` for a double-double `g > 0`, to double-double accuracy.
#[inline(always)]
pub fn sqrt_dd(g: DD) -> DD {
    let s = g.hi.sqrt();
    let (p, pe) = two_prod(s, s);
    let r = ((g.hi - p) - pe) + g.lo;
    let (h, l) = two_sum(s, r / (2.0 * s));
    DD { hi: h, lo: l }
}

/// Four independent double-double accumulators, so that the error-free
/// sums run in parallel lanes (a single chain is latency-bound at ~12 cycles
/// per term). The lanes are combined in a fixed order: results depend only
/// on the inputs, never on threads or CPU features.
#[derive(Clone, Copy, Default)]
struct Lanes {
    hi: [f64; 4],
    lo: [f64; 4],
}

impl Lanes {
    #[inline(always)]
    fn add_products(&mut self, a: &[f64; 4], b: &[f64; 4]) {
        for l in 0..4 {
            let (p, pe) = two_prod(a[l], b[l]);
            let (s, se) = two_sum(self.hi[l], p);
            self.hi[l] = s;
            self.lo[l] += pe + se;
        }
    }
    #[inline(always)]
    fn total(self) -> DD {
        let a = DD::new(self.hi[0], self.lo[0]).add(DD::new(self.hi[1], self.lo[1]));
        let b = DD::new(self.hi[2], self.lo[2]).add(DD::new(self.hi[3], self.lo[3]));
        a.add(b)
    }
}

#[inline(always)]
fn dot_lanes(x: &[f64], y: &[f64]) -> DD {
    let n = x.len().min(y.len());
    let (x, y) = (&x[..n], &y[..n]);
    let mut acc = Lanes::default();
    let mut xc = x.chunks_exact(4);
    let mut yc = y.chunks_exact(4);
    for (a, b) in (&mut xc).zip(&mut yc) {
        let a: [f64; 4] = [a[0], a[1], a[2], a[3]];
        let b: [f64; 4] = [b[0], b[1], b[2], b[3]];
        acc.add_products(&a, &b);
    }
    let (xr, yr) = (xc.remainder(), yc.remainder());
    if !xr.is_empty() {
        let mut a = [0.0; 4];
        let mut b = [0.0; 4];
        a[..xr.len()].copy_from_slice(xr);
        b[..yr.len()].copy_from_slice(yr);
        acc.add_products(&a, &b);
    }
    acc.total()
}

/// `sum x_i^2` in double-double.
#[inline(always)]
pub fn sumsq_dd(x: &[f64]) -> DD {
    dot_lanes(x, x)
}

/// `sum x_i y_i` in double-double (the Ogita–Rump–Oishi Dot2 algorithm,
/// in four lanes, without the final rounding).
#[inline(always)]
pub fn dot_dd(x: &[f64], y: &[f64]) -> DD {
    dot_lanes(x, y)
}

/// `sum x_i y_i` as accurate as if computed in twice the working precision,
/// then rounded (Dot2).
#[inline(always)]
pub fn dot2(x: &[f64], y: &[f64]) -> f64 {
    dot_dd(x, y).value()
}

/// Plain sum of squares, for quantities whose relative accuracy suffices
/// (all terms are positive). Four lanes, fixed combination order, so the
/// compiler can vectorise it and the result never depends on the CPU path.
#[inline(always)]
pub fn sumsq(x: &[f64]) -> f64 {
    let mut acc = [0.0f64; 4];
    let mut c = x.chunks_exact(4);
    for q in &mut c {
        for l in 0..4 {
            acc[l] += q[l] * q[l];
        }
    }
    for (l, v) in c.remainder().iter().enumerate() {
        acc[l] += v * v;
    }
    (acc[0] + acc[1]) + (acc[2] + acc[3])
}

/// `|x - y|^2` (differences formed directly from the inputs, exact for
/// nearby points by Sterbenz's lemma), four lanes.
#[inline(always)]
pub fn dist_sq(x: &[f64], y: &[f64]) -> f64 {
    let mut acc = [0.0f64; 4];
    let mut xc = x.chunks_exact(4);
    let mut yc = y.chunks_exact(4);
    for (a, b) in (&mut xc).zip(&mut yc) {
        for l in 0..4 {
            let t = a[l] - b[l];
            acc[l] += t * t;
        }
    }
    for (l, (a, b)) in xc.remainder().iter().zip(yc.remainder()).enumerate() {
        let t = a - b;
        acc[l] += t * t;
    }
    (acc[0] + acc[1]) + (acc[2] + acc[3])
}

/// `1/cosh(a)^2`, the gap of the point at hyperbolic radius `2a` (in units of
/// R) from the origin, without overflow for large `a`:
/// `4 e / (1 + e)^2` with `e = exp(-2|a|)`.
#[inline(always)]
pub fn sech2(a: f64) -> f64 {
    let e = (-2.0 * a.abs()).exp();
    4.0 * e / ((1.0 + e) * (1.0 + e))
}

/// The weights `(a, b) = (sinh((1 - t) D), sinh(t D)) / sinh(D)` of the
/// geodesic point `a x + b y` on the hyperboloid (`D = d/R`), in a form that
/// neither overflows nor cancels for large `D`:
/// `sinh(s D)/sinh(D) = e^{(s - 1) D} expm1(-2 s D) / expm1(-2 D)`; for
/// `D = 0` the limit `(1 - t, t)`.
#[inline(always)]
pub fn geodesic_weights(t: f64, big_d: f64) -> (f64, f64) {
    if big_d == 0.0 {
        return (1.0 - t, t);
    }
    let den = (-2.0 * big_d).exp_m1();
    let w = |s: f64| ((s - 1.0) * big_d).exp() * (-2.0 * s * big_d).exp_m1() / den;
    (w(1.0 - t), w(t))
}

/// `1 + delta = cosh(d/R)`: distance from `delta/2 = sinh(d/(2R))^2` via
/// `d = 2R asinh(sqrt(delta/2))`, with no `arccosh(1 + delta)` (which
/// returns 0 for delta below 1e-16).
#[inline(always)]
pub fn distance_from_half_delta(radius: f64, half_delta: f64) -> f64 {
    2.0 * radius * half_delta.sqrt().asinh()
}

/// The gap `1 - kappa |x|^2` in double-double. The sum of squares is
/// compensated: a plain float64 sum is ~10% wrong at 1 - |x|/R = 1e-15.
#[inline(always)]
pub fn gap_dd(kappa: f64, x: &[f64]) -> DD {
    let q = sumsq_dd(x).mul_f64(kappa);
    DD::from(1.0).sub(q)
}

/// The gap `1 - kappa |x|^2`, correctly computed then rounded once.
#[inline(always)]
pub fn gap(kappa: f64, x: &[f64]) -> f64 {
    gap_dd(kappa, x).value()
}

/// `sum (x_i + sy y_i)(x_i - sy y_i) = |x|^2 - |y|^2`, exact to double-double
/// accuracy however close `x` is to `-sy y` (both factors are formed
/// error-free). `sy` is +1 or -1.
#[inline(always)]
pub fn diff_of_squares(x: &[f64], y: &[f64], sy: f64) -> f64 {
    let mut acc = DD::default();
    for (&a, &b) in x.iter().zip(y) {
        let (sh, sl) = two_sum(a, sy * b);
        let (dh, dl) = two_sum(a, -sy * b);
        acc = acc.add(DD { hi: sh, lo: sl }.mul(DD { hi: dh, lo: dl }));
    }
    acc.value()
}

/// `x . (x + sy y)` with the sum formed error-free, then a compensated dot.
#[inline(always)]
pub fn dot_with_sum(x: &[f64], y: &[f64], sy: f64) -> f64 {
    let mut acc = DD::default();
    for (&a, &b) in x.iter().zip(y) {
        let (sh, sl) = two_sum(a, sy * b);
        acc = acc.add(DD { hi: sh, lo: sl }.mul_f64(a));
    }
    acc.value()
}

/// The 2x2 minor `a b - c d` with both products formed error-free, so that
/// the difference of nearly equal products (nearly parallel vectors) keeps
/// its digits; rounded once.
#[inline(always)]
pub fn minor(a: f64, b: f64, c: f64, d: f64) -> f64 {
    let (p, pe) = two_prod(a, b);
    let (q, qe) = two_prod(c, d);
    DD::new(p, pe).sub(DD::new(q, qe)).value()
}

/// `|x ∧ y|^2 = |x|^2 |y|^2 - (x.y)^2`, the squared area spanned by `x` and
/// `y`, accurate to a few ulps even for nearly parallel vectors: in
/// double-double when the vectors are far from parallel, else as the sum of
/// squared 2x2 minors `x_i y_j - x_j y_i`, each formed error-free.
#[inline(always)]
pub fn wedge_sq(x: &[f64], y: &[f64]) -> f64 {
    let xx = sumsq_dd(x);
    let yy = sumsq_dd(y);
    let xy = dot_dd(x, y);
    let w = xx.mul(yy).sub(xy.mul(xy));
    let scale = xx.hi * yy.hi;
    if w.hi > 1e-12 * scale {
        return w.value();
    }
    let n = x.len().min(y.len());
    let mut acc = 0.0;
    for i in 0..n {
        for j in (i + 1)..n {
            let m = minor(x[i], y[j], x[j], y[i]);
            acc += m * m;
        }
    }
    acc
}

/// `(a ∧ b) . (a ∧ c) = |a|^2 (b.c) - (a.b)(a.c)`: in double-double when
/// that keeps the digits, else (`b` or `c` nearly parallel to `a`, where the
/// right-hand side cancels) from 2x2 minors formed error-free.
#[inline(always)]
pub fn wedge_dot(a: &[f64], b: &[f64], c: &[f64]) -> f64 {
    let aa = sumsq_dd(a);
    let w = aa.mul(dot_dd(b, c)).sub(dot_dd(a, b).mul(dot_dd(a, c)));
    if w.hi.abs() > 1e-8 * aa.hi * (sumsq(b) * sumsq(c)).sqrt() {
        return w.value();
    }
    let n = a.len();
    let mut acc = DD::default();
    for i in 0..n {
        for j in (i + 1)..n {
            let m1 = minor(a[i], b[j], a[j], b[i]);
            let m2 = minor(a[i], c[j], a[j], c[i]);
            let (t, te) = two_prod(m1, m2);
            acc = acc.add(DD::new(t, te));
        }
    }
    acc.value()
}

/// The part of `q` perpendicular to `p`, times `|p|^2`:
/// `out_i = |p|^2 q_i - (p.q) p_i`. Formed with `|p|^2` and `p.q` in
/// double-double, O(d), with absolute error ~1e-32 |p|^2 |q|. Where that
/// part is below 1e-8 |p|^2 |q| (`q` nearly parallel to `p`, where callers
/// may magnify a residual by up to x0 y0 on the hyperboloid) it is
/// recomputed from 2x2 minors formed error-free, `sum_j p_j (p_j q_i -
/// p_i q_j)`, O(d^2), which are exactly zero for an exact multiple of `p`
/// in one dimension or along a coordinate axis. Returns `|p|^2` and `p.q`.
#[inline(always)]
pub fn perp_scaled(p: &[f64], q: &[f64], out: &mut [f64]) -> (DD, DD) {
    let pp = sumsq_dd(p);
    let pq = dot_dd(p, q);
    let n = p.len();
    if n == 1 {
        out[0] = 0.0;
        return (pp, pq);
    }
    for i in 0..n {
        out[i] = pp.mul_f64(q[i]).sub(pq.mul_f64(p[i])).value();
    }
    let scale = pp.hi * pp.hi * sumsq(q);
    if sumsq(out) > 1e-16 * scale {
        return (pp, pq);
    }
    for i in 0..n {
        let mut acc = DD::default();
        for j in 0..n {
            if j == i {
                continue;
            }
            let m = minor(p[j], q[i], p[i], q[j]);
            let (t, te) = two_prod(p[j], m);
            acc = acc.add(DD::new(t, te));
        }
        out[i] = acc.value();
    }
    (pp, pq)
}

/// `artanh(t)` for `t = sqrt(kappa)|x|` given its gap `g = 1 - t^2`, without
/// forming `1 - t` (which has no digits left near the boundary):
/// `artanh t = log1p(2 t (1 + t) / g) / 2`.
#[inline(always)]
pub fn artanh_from_gap(t: f64, g: f64) -> f64 {
    0.5 * (2.0 * t * (1.0 + t) / g).ln_1p()
}

/// The factor `f` with `r ⊗ x = f x` (Möbius and Einstein scalar
/// multiplication share it): `f = tanh(r artanh t) / t`, `t = sqrt(kappa)|x|`.
/// `g` is the gap of `x`.
#[inline(always)]
pub fn radial_scale_factor(r: f64, t: f64, g: f64) -> f64 {
    if t == 0.0 {
        // The limit t -> 0 of tanh(r artanh t)/t.
        return r;
    }
    let a = artanh_from_gap(t, g);
    (r * a).tanh() / t
}

/// `ln(1 + u)` for `u >= 0`, branch-free and table-free so that it
/// vectorises: the exponent is split off with integer operations, and the
/// mantissa logarithm uses the classic `s = f/(2 + f)` series (the fdlibm
/// argument reduction and minimax coefficients). The rounding error of
/// `w = 1 + u` is recovered exactly (`c = u - (w - 1)`) and folded into the
/// reduced argument, so the result is within ~1 ulp of `ln(1 + u)` even for
/// tiny `u`. One division, no calls.
#[inline(always)]
pub fn log1p_fast(u: f64) -> f64 {
    const LN2_HI: f64 = 6.93147180369123816490e-01;
    const LN2_LO: f64 = 1.90821492927058770002e-10;
    const LG1: f64 = 6.666666666666735130e-01;
    const LG2: f64 = 3.999999999940941908e-01;
    const LG3: f64 = 2.857142874366239149e-01;
    const LG4: f64 = 2.222219843214978396e-01;
    const LG5: f64 = 1.818357216161805012e-01;
    const LG6: f64 = 1.531383769920937332e-01;
    const LG7: f64 = 1.479819860511658591e-01;
    let w = 1.0 + u;
    let c = u - (w - 1.0); // exact rounding error of 1 + u
                           // Reduce w = 2^k m with m in [sqrt(2)/2, sqrt(2)).
    let ix = w.to_bits().wrapping_add(0x3ff0_0000_0000_0000 - 0x3fe6_a09e_667f_3bcd);
    let e = ix >> 52; // biased exponent: k = e - 1023
    let k = f64::from_bits(e | 0x4330_0000_0000_0000) - 4503599627370496.0 - 1023.0;
    let m = f64::from_bits((ix & 0x000f_ffff_ffff_ffff) + 0x3fe6_a09e_667f_3bcd);
    // f = m - 1 (exact), plus the rounding error of w scaled by 2^-k (all
    // integer work in u64 lanes, so the function vectorises).
    let scale = f64::from_bits((2046u64.wrapping_sub(e)) << 52);
    let f = (m - 1.0) + c * scale;
    let s = f / (2.0 + f);
    let z = s * s;
    let w2 = z * z;
    let t1 = w2 * (LG2 + w2 * (LG4 + w2 * LG6));
    let t2 = z * (LG1 + w2 * (LG3 + w2 * (LG5 + w2 * LG7)));
    let r = t2 + t1;
    let hfsq = 0.5 * f * f;
    k * LN2_HI - ((hfsq - (s * (hfsq + r) + k * LN2_LO)) - f)
}

/// `arccosh(1 + 2h) = 2 asinh(sqrt(h))` for `h >= 0` as
/// `log1p(2h + 2 sqrt(h (1 + h)))`, with [`log1p_fast`]: one square root and
/// one division.
#[inline(always)]
pub fn acosh1p2_fast(h: f64) -> f64 {
    // sqrt(h (1 + h)) rounds to h for h >= 2^500, where h (1 + h) itself
    // would overflow (half-space pairs reach h ~ 2^1002; fuzz F2): the square
    // root is taken of min(h, 2^500) and raised to h by `max`, which leaves
    // every smaller h bit for bit as before (sqrt(h (1 + h)) >= h), without a
    // branch.
    const BIG: f64 = 3.273390607896142e150; // 2^500
    let hc = h.min(BIG);
    log1p_fast(2.0 * h + 2.0 * (hc * (1.0 + hc)).sqrt().max(h))
}

/// Runs `f` with a zeroed scratch buffer of length `n` (on the stack when
/// `n <= 32`).
#[inline(always)]
pub fn with_scratch<R>(n: usize, f: impl FnOnce(&mut [f64]) -> R) -> R {
    with_scratch_of::<32, R>(n, f)
}

/// [`with_scratch`] with room for `N` values on the stack (a larger `N` for
/// callers whose buffers are larger, at the cost of zeroing it per call).
#[inline(always)]
pub fn with_scratch_of<const N: usize, R>(n: usize, f: impl FnOnce(&mut [f64]) -> R) -> R {
    if n <= N {
        let mut buf = [0f64; N];
        f(&mut buf[..n])
    } else {
        let mut buf = vec![0f64; n];
        f(&mut buf)
    }
}

/// The exponent `e` with `m / 2^e` in [0.5, 1) for finite `m > 0` (frexp).
#[inline(always)]
pub fn scale_exponent_of(m: f64) -> i32 {
    let bits = m.to_bits();
    let raw = ((bits >> 52) & 0x7ff) as i32;
    if raw == 0 {
        // subnormal
        -1022 - (bits.leading_zeros() as i32 - 12)
    } else {
        raw - 1022
    }
}

/// The exponent `e` with `max |w_i| / 2^e` in [0.5, 1) when `w` is very
/// large or very small, else 0 (no scaling for ordinary vectors).
#[inline(always)]
pub fn scale_exponent(w: &[f64]) -> i32 {
    let m = w.iter().fold(0.0f64, |a, &b| a.max(b.abs()));
    if (1e-150..=1e150).contains(&m) || m == 0.0 {
        0
    } else {
        // within -1022..=1022, so that 2^e and 2^-e are both exact (pow2
        // clamps): subnormal vectors are scaled by 2^1022 only, which already
        // lifts their squares above 2^-105.
        scale_exponent_of(m).clamp(-1022, 1022)
    }
}

/// `2^e` exactly, for |e| <= 1022.
#[inline(always)]
pub fn pow2(e: i32) -> f64 {
    let e = e.clamp(-1022, 1023);
    f64::from_bits(((e + 1023) as u64) << 52)
}

/// The exponent `e` with `max |w_i| / 2^e` in [0.5, 1), within -1022..=1022
/// so that `2^e` and `2^-e` are both exact ([`pow2`]); 0 for a zero or
/// non-finite vector. Unlike [`scale_exponent`] it scales ordinary vectors
/// too: for kernels that multiply three or more coordinates together (a
/// squared norm times a coordinate, `perp_scaled`), where vectors of size
/// 1e-100 already underflow. Scaling by a power of two is exact, so it
/// changes no digit of an ordinary result.
#[inline(always)]
pub fn unit_exponent(w: &[f64]) -> i32 {
    let m = w.iter().fold(0.0f64, |a, &b| a.max(b.abs()));
    if m > 0.0 && m.is_finite() {
        scale_exponent_of(m).clamp(-1022, 1022)
    } else {
        0
    }
}

/// `|x|`, without the underflow of `|x|^2` for coordinates below ~1e-154
/// (nor its overflow above ~1e154): the vector is scaled by a power of two
/// (exact) first when it is that small or large.
#[inline(always)]
pub fn norm_scaled(x: &[f64]) -> f64 {
    let e = scale_exponent(x);
    if e == 0 {
        return sumsq(x).sqrt();
    }
    let up = pow2(-e);
    let mut acc = 0.0;
    for &v in x {
        let t = v * up;
        acc += t * t;
    }
    acc.sqrt() * pow2(e)
}

/// `artanh(t)/t` for `t = sqrt(kappa)|x|` of gap `g` ([`artanh_from_gap`]),
/// with its limit 1 for `t` below 1e-100, where `artanh(t) = t` in float64
/// (`t` itself may have underflowed to 0 or lost digits as a subnormal).
#[inline(always)]
pub fn artanh_ratio(t: f64, g: f64) -> f64 {
    if t < 1e-100 {
        1.0
    } else {
        artanh_from_gap(t, g) / t
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn two_sum_and_two_prod_are_exact() {
        // common practice: the error terms recover what rounding dropped
        let (s, e) = two_sum(1.0, 1e-20);
        assert_eq!(s, 1.0);
        assert_eq!(e, 1e-20);
        let a = 1.0 + f64::EPSILON;
        let (p, e) = two_prod(a, a);
        assert_eq!(p, 1.0 + 2.0 * f64::EPSILON);
        assert_eq!(e, f64::EPSILON * f64::EPSILON);
    }

    #[test]
    fn gap_keeps_digits_at_the_boundary() {
        // x = (1 - 2^-50) e_1: 1 - x^2 = 2^-49 - 2^-100 exactly.
        let x = [1.0 - 2f64.powi(-50), 0.0];
        let g = gap(1.0, &x);
        let exact = 2f64.powi(-49) - 2f64.powi(-100);
        assert!(((g - exact) / exact).abs() < 1e-15);
        // Split over two coordinates the plain sum loses it; dd does not.
        let a = 0.6f64;
        let b = (1.0 - a * a - 1e-15).sqrt();
        let g = gap(1.0, &[a, b]);
        let q = sumsq_dd(&[a, b]);
        assert!((g - (1.0 - q.hi - q.lo)).abs() < 1e-30);
    }

    #[test]
    fn diff_of_squares_is_exact_for_near_opposite_points() {
        let x = [0.3, -0.7];
        let y = [-0.3 + 1e-13, 0.7 + 3e-14];
        // |x|^2 - |y|^2 computed by hand in exact rational steps:
        // (x+y).(x-y) with x+y = (1e-13, -3e-14) (exact: Sterbenz)
        let d = diff_of_squares(&x, &y, 1.0);
        let s = [x[0] + y[0], x[1] + y[1]];
        let m = DD::new(x[0], 0.0)
            .sub(DD::new(y[0], 0.0))
            .mul_f64(s[0])
            .add(DD::new(x[1], 0.0).sub(DD::new(y[1], 0.0)).mul_f64(s[1]));
        assert!(((d - m.value()) / d).abs() < 1e-15);
    }

    #[test]
    fn log1p_fast_matches_std_within_two_ulps() {
        // reference: Rust std ln_1p (libm); common practice
        let mut u = 1e-300;
        while u < 1e300 {
            for v in [u, u * 1.37, u * 2.9, u * 7.1] {
                let a = log1p_fast(v);
                let b = v.ln_1p();
                let ulp = f64::EPSILON * b.abs().max(f64::MIN_POSITIVE);
                assert!((a - b).abs() <= 2.0 * ulp, "u = {v}: {a} vs {b}");
            }
            u *= 10.0;
        }
        assert_eq!(log1p_fast(0.0), 0.0);
        // 2 asinh(sqrt h) identity (handbook)
        for h in [1e-30, 1e-12, 0.3, 5.0, 1e20] {
            let a = acosh1p2_fast(h);
            let b = 2.0 * h.sqrt().asinh();
            assert!((a - b).abs() <= 4.0 * f64::EPSILON * b, "h = {h}: {a} vs {b}");
        }
    }

    #[test]
    fn radial_scale_matches_closed_forms() {
        // 2 ⊗ x for K = -1 has norm 2t/(1+t^2) (doubling formula of tanh).
        let t: f64 = 0.5;
        let f = radial_scale_factor(2.0, t, 1.0 - t * t);
        assert!((f * t - 2.0 * t / (1.0 + t * t)).abs() < 1e-15);
        assert_eq!(radial_scale_factor(3.0, 0.0, 1.0), 3.0);
    }

    #[test]
    fn scaling_helpers_survive_underflow() {
        // closed forms (a 3-4-5 triangle; frexp of powers of two, common practice)
        let n = norm_scaled(&[3e-200, 4e-200]);
        assert!((n / 5e-200 - 1.0).abs() < 1e-15, "{n}");
        let n = norm_scaled(&[3.0 * 5e-324, 4.0 * 5e-324]);
        assert_eq!(n, 5.0 * 5e-324);
        assert_eq!(scale_exponent_of(5e-324), -1073); // 2^-1074 = 0.5 * 2^-1073
        assert_eq!(scale_exponent_of(1.0), 1);
        assert_eq!(unit_exponent(&[0.0, -0.75]), 0);
        assert_eq!(unit_exponent(&[0.0, 0.0]), 0);
        // the scaled vector of a subnormal one: exact inverse powers of two
        let w = [5e-324, -1e-320];
        let e = scale_exponent(&w);
        assert_eq!(e, -1022);
        assert_eq!(w[1] * pow2(-e) * pow2(e), w[1]);
        assert_eq!(artanh_ratio(1e-200, 1.0), 1.0);
        assert!((artanh_ratio(0.5, 0.75) - 0.5f64.atanh() / 0.5).abs() < 1e-15);
    }
}
