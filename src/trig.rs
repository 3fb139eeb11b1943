//! Gyrotrigonometry: gyroangles and triangles in the Möbius (Poincaré) and
//! Einstein (Klein) gyrovector spaces, and triangles in every model.
//!
//! The gyroangle at `b` between `⊖b⊕a` and `⊖b⊕c` (Ungar, "Analytic
//! Hyperbolic Geometry", 2005, ch. 8) is the Euclidean angle between those
//! two gyrovectors. In the Poincaré ball it equals the hyperbolic angle of
//! the triangle at `b` (the left gyrotranslation `⊖b⊕·` is an isometry taking
//! `b` to the origin, where the model is conformal); in the Klein ball the
//! Einstein gyrovectors are the Möbius ones of the Poincaré images scaled
//! radially (Ungar's isomorphism `p -> 2 ⊗ p`), so the angle is the same.
//!
//! How the digits are kept. The inputs are taken as exact; every quantity
//! below is a function of them computed to a few ulps, with no clamp:
//!
//! * **Directions in double-double.** An angle at `b` only needs the
//!   directions of the two gyrovectors, up to positive factors. In the
//!   Poincaré ball, with `s = b - a` and `t = kappa |s|^2 / g_b`,
//!   `b ⊖ a ∝ s + t b` (the numerator `g_b s + kappa |s|^2 b` of the Möbius
//!   sum written around `s`, see `models::poincare::add_g`, divided by
//!   `g_b > 0`); it is `-(⊖b⊕a)` up to a positive factor, and negating both
//!   directions leaves the angle unchanged. It is formed in double-double
//!   from the exact inputs (Klein vertices first mapped to their Poincaré
//!   images in double-double, `p = k/(1 + sqrt g_k)`, with the exact image
//!   gap `2 sqrt(g_k)/(1 + sqrt g_k)`). In the half-space the
//!   geodesic from `b` towards `a` is the circle through `b`, `a` and the
//!   mirror image of `a` in the boundary plane; inverting in a sphere about
//!   `b` turns it into a line, which gives its tangent at `b`:
//!   `v ∝ 2 b_d (a - b) + |a - b|^2 e_d`, again formed in double-double.
//!   On the hyperboloid the tangent `A - cosh(d/R) B` is read in an
//!   orthonormal frame at `b` ([`hyperboloid_direction`]) from exact 2x2
//!   minors of the spatial parts and `cosh(d/R) - 1` in double-double:
//!   Poincaré images of far points (gap ~e^{-r/R}) would not separate
//!   vertices far out on nearly the same ray.
//!   These vectors carry about 32 digits, so the part of one across the
//!   other (`w_⊥ = |u|^2 w - (u.w) u`, in double-double, or for nearly
//!   parallel vectors the 2x2 minors `u_i w_j - u_j w_i` in double-double)
//!   keeps its digits for thin and collinear triangles.
//! * **Angles** `atan2(|u ∧ w|, u.w)` with `|u ∧ w| = |w_⊥|/|u|` and the
//!   sine `|w_⊥| / (|u|^2 |w|)` taken directly (not `sin` of a rounded
//!   angle near π).
//! * **Sides** are the element-wise distances of each model (`pairwise`),
//!   bit-identical to `distance`, with their exact `h = sinh^2(d/2R)`.
//! * **Defect.** Not `π - (α + β + γ)` (a difference of rounded angles),
//!   but the hyperbolic form of the spherical-excess formula
//!   `tan(E/2) = sin a sin c sin B / (1 + cos a + cos b + cos c)` (Todhunter
//!   & Leathem, "Spherical Trigonometry", the Cagnoli-type formulas; the
//!   hyperbolic form by `a -> i a`; from memory, checked against
//!   `π - (α + β + γ)` in mpmath in the tests):
//!   `tan(δ/2) = sinh a sinh c sin β / (1 + cosh a + cosh b + cosh c)`
//!   (sides in units of R), written with `h_x = sinh^2(x/2)` and
//!   `ρ_x = h_x/(1 + h_x)` as
//!   `2 sqrt(ρ_a ρ_c) sin β / (1/(1 + h_a) + 1/(1 + h_c) + h_b/((1 + h_a)(1 + h_c)))`:
//!   products and a sum of positive terms, no overflow for any side the
//!   models reach, relative accuracy that of `sin β` and the `h`. The vertex
//!   used is the one with the largest sine.
//!
//! Limits: the directions carry ~32 digits, so an angle below ~1e-16 of
//! the largest one at its vertex (vertices collinear to the last bits of
//! their coordinates) keeps only an absolute accuracy of ~1e-32 rad. On the
//! hyperboloid the curvature enters through `sqrt(kappa)` (rounded unless
//! `kappa` is a power of 4, e.g. K = -1), which limits the directions there
//! to a relative 1e-16.

use crate::batch::{map_rows, scalar_core, Data, Operand, Output};
use crate::error::{Fault, Result, RowFault};
use crate::models::ball::{checked_gap, Curvature};
use crate::models::{halfspace, hyperboloid, Model};
use crate::numeric::sqrt_dd;
use crate::numeric::{dot_dd, norm_scaled, pow2, sumsq_dd, two_prod, two_sum, unit_exponent, with_scratch, DD};
use crate::pairwise::{distance_from_h, pair_h, pair_scale, read_pair_point, seq_dist_sq, PairSpace};

/// The gyrovector space of a ball model.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Space {
    /// Möbius (Poincaré ball).
    Mobius,
    /// Einstein (Klein ball).
    Einstein,
}

/// `a / b` in double-double (one correction of the quotient).
#[inline(always)]
fn div(a: DD, b: DD) -> DD {
    let q1 = a.hi / b.hi;
    let r = a.sub(b.mul_f64(q1));
    let q2 = r.hi / b.hi;
    let (h, l) = two_sum(q1, q2);
    DD { hi: h, lo: l }
}

/// `sum x_i^2` of a double-double vector.
#[inline(always)]
fn sumsq_v(hi: &[f64], lo: &[f64]) -> DD {
    let mut acc = DD::default();
    for (&h, &l) in hi.iter().zip(lo) {
        let x = DD { hi: h, lo: l };
        acc = acc.add(x.mul(x));
    }
    acc
}

/// `|a ∧ b|^2` of two float64 vectors in double-double, from the 2x2 minors
/// `a_i b_j - a_j b_i`, each exact to double-double rounding.
#[inline(always)]
fn wedge_sq_dd(a: &[f64], b: &[f64]) -> DD {
    let mut acc = DD::default();
    for i in 0..a.len() {
        for j in (i + 1)..a.len() {
            let m = minor_dd(a[i], b[j], a[j], b[i]);
            acc = acc.add(m.mul(m));
        }
    }
    acc
}

/// `x y - z w` in double-double, both products formed error-free.
#[inline(always)]
fn minor_dd(x: f64, y: f64, z: f64, w: f64) -> DD {
    let (p, pe) = two_prod(x, y);
    let (q, qe) = two_prod(z, w);
    DD::new(p, pe).sub(DD::new(q, qe))
}

/// `cosh(d/R) - 1` of two hyperboloid points from their spatial parts, in
/// double-double: the two non-negative terms of `hyperboloid::half_delta`
/// (`cosh(r_a - r_b) - 1` and `kappa (|a||b| - a.b)`, the latter as
/// `kappa |a ∧ b|^2 / (|a||b| + a.b)` when `a.b > 0`), carried to twice
/// the precision.
#[inline(always)]
fn cosh_m1_dd(k: &Curvature, a: &[f64], b: &[f64]) -> DD {
    let (aa, bb) = (sumsq_dd(a), sumsq_dd(b));
    let (na, nb) = (sqrt_dd(aa), sqrt_dd(bb));
    let one = DD::from(1.0);
    let ca = sqrt_dd(one.add(aa.mul_f64(k.kappa)));
    let cb = sqrt_dd(one.add(bb.mul_f64(k.kappa)));
    // sinh(r_a - r_b) = sqrt(kappa) (|a|^2 - |b|^2) / (|a| c_b + |b| c_a)
    let mut diff = DD::default();
    for (&x, &y) in a.iter().zip(b) {
        let (sh, sl) = two_sum(x, y);
        let (dh, dl) = two_sum(x, -y);
        diff = diff.add(DD { hi: sh, lo: sl }.mul(DD { hi: dh, lo: dl }));
    }
    let den = na.mul(cb).add(nb.mul(ca));
    let t1 = if den.hi > 0.0 {
        let sh = div(diff.mul_f64(k.sqrt_kappa), den);
        let s2 = sh.mul(sh);
        div(s2, one.add(sqrt_dd(one.add(s2))))
    } else {
        DD::default()
    };
    let p = dot_dd(a, b);
    let nn = na.mul(nb);
    let t2 = if p.hi <= 0.0 { nn.sub(p) } else { div(wedge_sq_dd(a, b), nn.add(p)) };
    t1.add(t2.mul_f64(k.kappa))
}

/// The direction at the hyperboloid point `b` of the geodesic to `a`, in
/// an orthonormal frame of the tangent space at `b`, from the spatial parts
/// (`bs` is `b_s` scaled by a power of two, `eb` its exponent), into `oh`,
/// `ol`. The tangent is `U = A - cosh(d/R) B`, with spatial part
/// `U_s = Δ - (cosh(d/R) - 1) b_s` (`Δ = a_s - b_s`); its Minkowski norm
/// splits into the parts across and along `n = b_s/|b_s|` as
/// `|U_⊥|^2 + (U_∥ / c_b)^2` (`c_b = x0/R`), so `U_⊥ + (U_∥/c_b) n` has the
/// Euclidean angles of the tangents. Written times `|b̂|^2`, and with the
/// part along `n` kept apart as an extra coordinate (length d + 1; added to
/// the coordinates it would be rounded away next to a radial part up to
/// ~e^{2r/R} larger): `(|b̂|^2 a_⊥, (b̂.Δ - (cosh - 1) |b̂|^2 2^eb) |b̂| / c_b)`, with
/// `|b̂|^2 a_⊥ = sum_j b̂_j (b̂_j a_i - b̂_i a_j)` from exact minors (it
/// vanishes for `a` on the ray of `b`) and `cosh - 1` from
/// [`cosh_m1_dd`]: no difference of far coordinates is rounded.
#[inline(always)]
#[allow(clippy::too_many_arguments)]
fn hyperboloid_direction(k: &Curvature, b: &[f64], bs: &[f64], eb: i32, a: &[f64], oh: &mut [f64], ol: &mut [f64]) {
    let n = a.len();
    ol.iter_mut().for_each(|v| *v = 0.0);
    if bs.iter().all(|&v| v == 0.0) {
        // b at the origin: the tangent towards a is a_s
        oh[..n].copy_from_slice(a);
        oh[n] = 0.0;
        return;
    }
    let bb = sumsq_dd(bs);
    let mut bd = DD::default(); // b̂.Δ
    for i in 0..n {
        let (dh, dl) = two_sum(a[i], -b[i]);
        bd = bd.add(DD { hi: dh, lo: dl }.mul_f64(bs[i]));
    }
    let cb = sqrt_dd(DD::from(1.0).add(sumsq_dd(b).mul_f64(k.kappa)));
    let along = div(bd.sub(cosh_m1_dd(k, a, b).mul(bb).mul_f64(pow2(eb))), cb);
    for i in 0..n {
        let mut acc = DD::default();
        for j in 0..n {
            if j != i {
                acc = acc.add(minor_dd(bs[j], a[i], bs[i], a[j]).mul_f64(bs[j]));
            }
        }
        oh[i] = acc.hi;
        ol[i] = acc.lo;
    }
    let rho = along.mul(sqrt_dd(bb));
    oh[n] = rho.hi;
    ol[n] = rho.lo;
}

/// Reads a vertex of `model` into its frame (the Poincaré image for the
/// ball models, the point itself in the half-space, the spatial part on the
/// hyperboloid) in double-double: `hi`, `lo` of length d. Returns the gap of
/// the Poincaré image in double-double (1 for the other frames).
#[inline(always)]
fn read_vertex(
    model: Model,
    k: &Curvature,
    x: &[f64],
    hi: &mut [f64],
    lo: &mut [f64],
) -> std::result::Result<DD, Fault> {
    match model {
        Model::Poincare => {
            let g = checked_gap(k, x)?;
            hi.copy_from_slice(x);
            lo.iter_mut().for_each(|v| *v = 0.0);
            Ok(g)
        }
        Model::HalfSpace => {
            halfspace::read_point(x)?;
            hi.copy_from_slice(x);
            lo.iter_mut().for_each(|v| *v = 0.0);
            Ok(DD::from(1.0))
        }
        Model::Klein => {
            let (s, w) = crate::models::klein::poincare_image_dd(x, checked_gap(k, x)?, hi, lo);
            Ok(div(s.mul_f64(2.0), w))
        }
        Model::Hyperboloid => {
            hyperboloid::read_point(k, x)?;
            hi.copy_from_slice(&x[1..]);
            lo.iter_mut().for_each(|v| *v = 0.0);
            Ok(DD::from(1.0))
        }
    }
}

/// A vertex in its frame: coordinates (hi, lo) and the image gap.
type Vertex<'a> = (&'a [f64], &'a [f64], DD);

/// Where the directions at a vertex are formed.
#[derive(Clone, Copy, PartialEq, Eq)]
enum Frame {
    /// The Poincaré ball (images of the ball models).
    Ball,
    /// The half-space, in its own coordinates.
    Half,
    /// The hyperboloid, from spatial parts.
    Sheet,
}

impl Frame {
    fn of(model: Model) -> Frame {
        match model {
            Model::Poincare | Model::Klein => Frame::Ball,
            Model::HalfSpace => Frame::Half,
            Model::Hyperboloid => Frame::Sheet,
        }
    }
}

/// The direction at `b` of the geodesic to `a` (up to a positive factor and
/// a sign shared by every direction at `b`; see the module notes), in
/// double-double, into `oh`, `ol` (ball and half-space frames).
#[inline(always)]
fn direction(half: bool, k: &Curvature, b: Vertex, a: Vertex, oh: &mut [f64], ol: &mut [f64]) {
    let n = oh.len();
    for i in 0..n {
        // Ball frames: s = b - a; half-space: a - b.
        let (x, y) = if half { ((a.0[i], a.1[i]), (b.0[i], b.1[i])) } else { ((b.0[i], b.1[i]), (a.0[i], a.1[i])) };
        let (sh, se) = two_sum(x.0, -y.0);
        let s = DD::new(sh, se + (x.1 - y.1));
        oh[i] = s.hi;
        ol[i] = s.lo;
    }
    let ss = sumsq_v(oh, ol);
    if half {
        // 2 b_d (a - b) + |a - b|^2 e_d
        let bd = 2.0 * b.0[n - 1];
        for i in 0..n {
            let v = DD { hi: oh[i], lo: ol[i] }.mul_f64(bd);
            oh[i] = v.hi;
            ol[i] = v.lo;
        }
        let v = DD { hi: oh[n - 1], lo: ol[n - 1] }.add(ss);
        oh[n - 1] = v.hi;
        ol[n - 1] = v.lo;
    } else {
        // s + (kappa |s|^2 / g_b) b
        let t = div(ss.mul_f64(k.kappa), b.2);
        for i in 0..n {
            let v = DD { hi: oh[i], lo: ol[i] }.add(t.mul(DD { hi: b.0[i], lo: b.1[i] }));
            oh[i] = v.hi;
            ol[i] = v.lo;
        }
    }
}

/// Scales a double-double vector by a power of two (exact) so that its
/// largest high part lies in [0.5, 1); false for the zero vector.
#[inline(always)]
fn normalise(hi: &mut [f64], lo: &mut [f64]) -> bool {
    if hi.iter().all(|&v| v == 0.0) {
        return false;
    }
    let up = pow2(-unit_exponent(hi));
    hi.iter_mut().zip(lo.iter_mut()).for_each(|(h, l)| {
        *h *= up;
        *l *= up;
    });
    true
}

/// The angle between two double-double vectors and its sine, from
/// `w_⊥ = |u|^2 w - (u.w) u` formed in double-double (see the module
/// notes); for nearly parallel vectors (sine below 1e-8), where the
/// absolute error ~1e-32 of that difference matters, from the 2x2 minors
/// `u_i w_j - u_j w_i` in double-double instead (O(d^2)), which keep the
/// digits of the wedge when the vectors' components are of very different
/// sizes. Both vectors are non-zero and normalised; `q` is scratch.
#[inline(always)]
fn angle_sine(uh: &[f64], ul: &[f64], wh: &[f64], wl: &[f64], q: &mut [f64]) -> (f64, f64) {
    let m = uh.len();
    let uu = sumsq_v(uh, ul);
    let mut uw = DD::default();
    for i in 0..m {
        uw = uw.add(DD { hi: uh[i], lo: ul[i] }.mul(DD { hi: wh[i], lo: wl[i] }));
    }
    for i in 0..m {
        let a = uu.mul(DD { hi: wh[i], lo: wl[i] });
        let b = uw.mul(DD { hi: uh[i], lo: ul[i] });
        q[i] = a.sub(b).value();
    }
    let (nu2, nw) = (uu.value(), sumsq_v(wh, wl).value().sqrt());
    let nu = nu2.sqrt();
    // |u ∧ w| = |w_⊥| / |u|
    let mut wedge = norm_scaled(q) / nu;
    if wedge < 1e-8 * nu * nw {
        let minor = |i: usize, j: usize| {
            let (ui, uj) = (DD { hi: uh[i], lo: ul[i] }, DD { hi: uh[j], lo: ul[j] });
            let (wi, wj) = (DD { hi: wh[i], lo: wl[i] }, DD { hi: wh[j], lo: wl[j] });
            ui.mul(wj).sub(uj.mul(wi)).value()
        };
        // two passes (largest minor, then the scaled sum of squares): minors
        // of 1e-200 would underflow when squared
        let mut big = 0.0f64;
        for i in 0..m {
            for j in (i + 1)..m {
                big = big.max(minor(i, j).abs());
            }
        }
        wedge = 0.0;
        if big > 0.0 {
            let up = pow2(-unit_exponent(&[big]));
            let mut acc = 0.0;
            for i in 0..m {
                for j in (i + 1)..m {
                    let t = minor(i, j) * up;
                    acc += t * t;
                }
            }
            wedge = acc.sqrt() / up;
        }
    }
    (wedge.atan2(uw.value()), (wedge / (nu * nw)).min(1.0))
}

/// The angle at vertex `b` (index `ib`) towards `a` (index `ia`) and `c`
/// (index `ic`), and its sine; faults name a vertex equal to `b`. `ws` has
/// length `6 d + 5` (directions of length d + 1, the last coordinate used
/// on the hyperboloid only).
#[inline(always)]
#[allow(clippy::too_many_arguments)]
fn angle_at(
    frame: Frame,
    k: &Curvature,
    v: [Vertex; 3],
    ia: usize,
    ib: usize,
    ic: usize,
    ws: &mut [f64],
) -> std::result::Result<(f64, f64), RowFault> {
    let d = v[0].0.len();
    let m = d + 1;
    let (uh, rest) = ws.split_at_mut(m);
    let (ul, rest) = rest.split_at_mut(m);
    let (wh, rest) = rest.split_at_mut(m);
    let (wl, rest) = rest.split_at_mut(m);
    let (q, bs) = rest.split_at_mut(m);
    if frame == Frame::Sheet {
        let b = v[ib].0;
        let eb = unit_exponent(b);
        let up = pow2(-eb);
        for (o, &x) in bs.iter_mut().zip(b) {
            *o = x * up;
        }
        hyperboloid_direction(k, b, &bs[..d], eb, v[ia].0, uh, ul);
        hyperboloid_direction(k, b, &bs[..d], eb, v[ic].0, wh, wl);
    } else {
        let half = frame == Frame::Half;
        direction(half, k, v[ib], v[ia], &mut uh[..d], &mut ul[..d]);
        direction(half, k, v[ib], v[ic], &mut wh[..d], &mut wl[..d]);
        uh[d] = 0.0;
        ul[d] = 0.0;
        wh[d] = 0.0;
        wl[d] = 0.0;
    }
    if !normalise(uh, ul) {
        return Err(RowFault::new(ia, Fault::Coincident(NAMES[ib])));
    }
    if !normalise(wh, wl) {
        return Err(RowFault::new(ic, Fault::Coincident(NAMES[ib])));
    }
    Ok(angle_sine(uh, ul, wh, wl, q))
}

const NAMES: [&str; 3] = ["a", "b", "c"];

/// Reads the three vertices of a row into `buf` (length `6 d`) and runs `f`
/// on them.
#[inline(always)]
fn with_vertices<R>(
    model: Model,
    k: &Curvature,
    r: &[&[f64]],
    d: usize,
    buf: &mut [f64],
    f: impl FnOnce([Vertex; 3], &mut [f64]) -> std::result::Result<R, RowFault>,
) -> std::result::Result<R, RowFault> {
    let (vs, ws) = buf.split_at_mut(6 * d);
    let (p0, rest) = vs.split_at_mut(2 * d);
    let (p1, p2) = rest.split_at_mut(2 * d);
    let (h0, l0) = p0.split_at_mut(d);
    let (h1, l1) = p1.split_at_mut(d);
    let (h2, l2) = p2.split_at_mut(d);
    let g0 = read_vertex(model, k, r[0], h0, l0).map_err(|f| RowFault::new(0, f))?;
    let g1 = read_vertex(model, k, r[1], h1, l1).map_err(|f| RowFault::new(1, f))?;
    let g2 = read_vertex(model, k, r[2], h2, l2).map_err(|f| RowFault::new(2, f))?;
    f([(&*h0, &*l0, g0), (&*h1, &*l1, g1), (&*h2, &*l2, g2)], ws)
}

/// Batched gyroangle at `b` between `⊖b⊕a` and `⊖b⊕c`:
/// `(..., d) x 3 -> (...)`.
pub fn angle_arrays<'a>(space: Space, k: Curvature, a: Data<'a>, b: Data<'a>, c: Data<'a>) -> Result<Output> {
    let ops = [Operand::point("a", a), Operand::point("b", b), Operand::point("c", c)];
    let model = if space == Space::Mobius { Model::Poincare } else { Model::Klein };
    map_rows(
        &ops,
        &scalar_core,
        80,
        #[inline(always)]
        |r, out| {
            let d = r[0].len();
            with_scratch(12 * d + 8, |buf| {
                with_vertices(model, &k, r, d, buf, |v, ws| {
                    out[0] = angle_at(Frame::Ball, &k, v, 0, 1, 2, ws)?.0;
                    Ok(())
                })
            })
        },
    )
}

/// `h = sinh^2(d/2R)` of two points of `model`, exactly as
/// `pairwise::point_distance` forms it (the side is `distance_from_h(h)`,
/// bit for bit the element-wise distance). Faults carry operand `i` or `j`.
#[inline(always)]
fn side_h(model: Model, k: &Curvature, x: &[f64], y: &[f64], i: usize, j: usize) -> std::result::Result<f64, RowFault> {
    let w = x.len() - usize::from(model == Model::Hyperboloid);
    let space = PairSpace::of(model);
    let ew = space.extra_width(w);
    with_scratch(2 * (w + ew), |buf| {
        let (bx, by) = buf.split_at_mut(w + ew);
        let (xh, xe) = bx.split_at_mut(w);
        let (yh, ye) = by.split_at_mut(w);
        let ax = read_pair_point(model, k, x, xh, xe).map_err(|f| RowFault::new(i, f))?;
        let ay = read_pair_point(model, k, y, yh, ye).map_err(|f| RowFault::new(j, f))?;
        let s = pair_scale(model, k);
        Ok(pair_h(space, k, s, seq_dist_sq(xh, yh), (xh, xe, ax), (yh, ye, ay)))
    })
}

/// The defect from the `h` of the two sides at the vertex (`hx`, `hy`), of
/// the side opposite (`ho`) and the sine of the angle at the vertex (see
/// the module notes).
#[inline(always)]
pub fn defect_from_sides(hx: f64, hy: f64, ho: f64, sine: f64) -> f64 {
    let (ex, ey) = (1.0 + hx, 1.0 + hy);
    let num = 2.0 * (hx / ex).sqrt() * (hy / ey).sqrt() * sine;
    let den = 1.0 / ex + 1.0 / ey + ho / ex / ey;
    2.0 * num.atan2(den)
}

/// Batched triangles of any model: `(..., w) x 3 -> (..., 8)` holding, per
/// row, the sides opposite a, b, c, the angles at a, b, c, the defect
/// `π - (α + β + γ)` and the area `defect R^2`.
pub fn triangle_arrays<'a>(model: Model, k: Curvature, a: Data<'a>, b: Data<'a>, c: Data<'a>) -> Result<Output> {
    let ops = [Operand::point("a", a), Operand::point("b", b), Operand::point("c", c)];
    if model == Model::Hyperboloid {
        hyperboloid::check_dim(&ops)?;
    }
    map_rows(
        &ops,
        &|_| vec![8],
        200,
        #[inline(always)]
        |r, out| {
            let w = r[0].len();
            let d = if model == Model::Hyperboloid { w - 1 } else { w };
            // sides first: they validate every vertex in its own model
            let h = [
                side_h(model, &k, r[1], r[2], 1, 2)?,
                side_h(model, &k, r[0], r[2], 0, 2)?,
                side_h(model, &k, r[0], r[1], 0, 1)?,
            ];
            for i in 0..3 {
                out[i] = distance_from_h(&k, h[i]);
            }
            let frame = Frame::of(model);
            let sines = with_scratch(12 * d + 8, |buf| {
                with_vertices(model, &k, r, d, buf, |v, ws| {
                    let (a0, s0) = angle_at(frame, &k, v, 1, 0, 2, ws)?;
                    let (a1, s1) = angle_at(frame, &k, v, 0, 1, 2, ws)?;
                    let (a2, s2) = angle_at(frame, &k, v, 0, 2, 1, ws)?;
                    out[3] = a0;
                    out[4] = a1;
                    out[5] = a2;
                    Ok([s0, s1, s2])
                })
            })?;
            // the vertex with the largest sine; its sides are the other two
            let j = if sines[0] >= sines[1] && sines[0] >= sines[2] {
                0
            } else if sines[1] >= sines[2] {
                1
            } else {
                2
            };
            out[6] = defect_from_sides(h[(j + 1) % 3], h[(j + 2) % 3], h[j], sines[j]);
            out[7] = out[6] * k.radius * k.radius;
            Ok(())
        },
    )
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::models::klein;
    use std::f64::consts::PI;

    fn tri(model: Model, k: &Curvature, a: &[f64], b: &[f64], c: &[f64]) -> Vec<f64> {
        let v = |x: &[f64]| ndarray::ArrayD::from_shape_vec(ndarray::IxDyn(&[x.len()]), x.to_vec()).unwrap();
        let (va, vb, vc) = (v(a), v(b), v(c));
        let out = triangle_arrays(model, *k, Data::F64(va.view()), Data::F64(vb.view()), Data::F64(vc.view()))
            .unwrap()
            .into_f64();
        out.iter().copied().collect()
    }

    #[test]
    fn defect_agrees_with_the_angle_sum_and_the_laws_of_cosines() {
        // handbook identities: the hyperbolic law of cosines (sides and
        // angles), Gauss–Bonnet (area = (π - sum of angles) R^2)
        let k = Curvature::new(-2.5).unwrap();
        let (a, b, c) = ([0.3, -0.1, 0.2], [-0.2, 0.4, 0.05], [0.1, 0.1, -0.5]);
        for model in [Model::Poincare, Model::Klein] {
            let t = tri(model, &k, &a, &b, &c);
            let (s, an) = (&t[0..3], &t[3..6]);
            let r = k.radius;
            let law = (s[1] / r).cosh() * (s[2] / r).cosh() - (s[1] / r).sinh() * (s[2] / r).sinh() * an[0].cos();
            if model == Model::Poincare {
                assert!((law - (s[0] / r).cosh()).abs() < 1e-13, "{law}");
                let dual = -an[1].cos() * an[2].cos() + an[1].sin() * an[2].sin() * (s[0] / r).cosh();
                assert!((dual - an[0].cos()).abs() < 1e-13);
                assert!((PI - an.iter().sum::<f64>() - t[6]).abs() < 1e-14, "{t:?}");
                assert!((t[7] - t[6] * r * r).abs() < 1e-15);
            }
            // sides and angles do not depend on the model (isometric images)
            let p = tri(Model::Poincare, &k, &a, &b, &c);
            if model == Model::Klein {
                let mut kp = [[0.0; 3]; 3];
                for (x, o) in [&a, &b, &c].iter().zip(kp.iter_mut()) {
                    klein::from_poincare(*x, crate::numeric::gap(k.kappa, *x), o);
                }
                let q = tri(Model::Klein, &k, &kp[0], &kp[1], &kp[2]);
                for i in 0..7 {
                    assert!((q[i] - p[i]).abs() < 1e-14 * p[i].abs().max(1.0), "{i} {q:?} {p:?}");
                }
            }
        }
    }

    #[test]
    fn every_model_gives_the_same_triangle() {
        // isometric images (the model maps of `convert`) have the same sides,
        // angles and defect; the defect also equals π - (α + β + γ) here
        // (Gauss–Bonnet, handbook), where that difference keeps its digits
        let k = Curvature::new(-0.5).unwrap();
        let pts = [[0.3, -0.1, 0.2], [-0.2, 0.4, 0.05], [0.1, 0.1, -0.5]];
        let p = tri(Model::Poincare, &k, &pts[0], &pts[1], &pts[2]);
        assert!((PI - p[3] - p[4] - p[5] - p[6]).abs() < 1e-14, "{p:?}");
        for model in [Model::Klein, Model::Hyperboloid, Model::HalfSpace] {
            let w = if model == Model::Hyperboloid { 4 } else { 3 };
            let mut conv = vec![vec![0.0; w]; 3];
            for (x, o) in pts.iter().zip(conv.iter_mut()) {
                crate::models::convert::from_hub(model, &k, x, crate::numeric::gap(k.kappa, x), o);
            }
            let q = tri(model, &k, &conv[0], &conv[1], &conv[2]);
            for i in 0..8 {
                assert!((q[i] - p[i]).abs() < 1e-14 * p[i].abs().max(1.0), "{model:?} {i} {q:?} {p:?}");
            }
        }
    }

    #[test]
    fn coincident_vertices_are_named() {
        let k = Curvature::default();
        let v = |x: &[f64]| ndarray::ArrayD::from_shape_vec(ndarray::IxDyn(&[x.len()]), x.to_vec()).unwrap();
        let (a, b) = (v(&[0.1, 0.2]), v(&[0.3, 0.0]));
        let e = angle_arrays(Space::Mobius, k, Data::F64(a.view()), Data::F64(b.view()), Data::F64(b.view()));
        let msg = format!("{:?}", e.unwrap_err());
        assert!(msg.contains("c") && msg.contains("coincides with b"), "{msg}");
    }
}
