//! Centroids: the weighted Fréchet mean (Riemannian Newton's method), the
//! Einstein midpoint (closed-form gyrocentroid) and the Fréchet variance,
//! for any model, optionally one per label in a single pass over the data.
//!
//! All work happens in the unit Poincaré ball (points scaled by sqrt(kappa)),
//! with each point's exact gap carried from the model's own coordinates.
//! Per iteration, one pass translates every point by the current estimate
//! (`(-mu) ⊕ x`, so logs and the Hessian are taken at the origin), and
//! accumulates the gradient `sum w u` (`u = log_mu(x)`, `|u| = d`) and the
//! exact Riemannian Hessian of `1/2 sum w d^2`, which for curvature -1 is
//! `sum w (P_u + d coth(d) (I - P_u))` (Jacobi fields grow like sinh;
//! e.g. Pennec, "Intrinsic statistics on Riemannian manifolds", 2006, and
//! any text on comparison geometry). Newton's step solves `H s = sum w u` and
//! moves `mu <- mu ⊕ exp_0(s)`; it converges in a handful of iterations,
//! where gradient descent needs 60+ on spread-out data. A step that makes the
//! gradient worse is halved (the objective is strictly convex, so this
//! safeguard always ends). Reductions run over fixed-size chunks summed in
//! order, so results are bit-identical for any number of threads.

use rayon::prelude::*;

use crate::batch::Data;
use crate::error::{Error, Result};
use crate::models::ball::Curvature;
use crate::models::convert::{from_hub, to_hub};
use crate::models::poincare;
use crate::models::points::PointArray;
use crate::models::Model;
use crate::numeric::{log1p_fast, sech2, sumsq};

/// Points per reduction chunk (fixed: results never depend on threads).
const CHUNK: usize = 2048;

/// Points of any model read into the unit Poincaré ball with their gaps.
/// Poincaré float64 input of curvature -1 in C order is borrowed, not copied.
pub struct UnitPoints<'a> {
    pub n: usize,
    pub d: usize,
    pub p: std::borrow::Cow<'a, [f64]>,
    pub g: Vec<f64>,
}

/// Reads `(n, width)` points of `model` (validated, rows named in errors).
pub fn unit_points<'a>(model: Model, k: &Curvature, name: &str, x: &'a Data) -> Result<UnitPoints<'a>> {
    let pa = PointArray::new(model, name, x)?.non_empty("a centroid needs at least one point")?;
    let (n, d) = (pa.n, pa.d);
    let mut g = vec![0f64; n];
    if model == Model::Poincare && k.kappa == 1.0 {
        if let Some(sl) = pa.as_slice() {
            pa.read_rows(CHUNK, g.chunks_mut(CHUNK).collect(), |gc, r, row| {
                gc[r] = crate::models::ball::checked_gap(k, row)?.value();
                Ok(())
            })?;
            return Ok(UnitPoints { n, d, p: std::borrow::Cow::Borrowed(sl), g });
        }
    }
    let mut p = vec![0f64; n * d];
    pa.read_rows(CHUNK, p.chunks_mut(CHUNK * d).zip(g.chunks_mut(CHUNK)).collect(), |(pc, gc), r, row| {
        let pr = &mut pc[r * d..(r + 1) * d];
        gc[r] = to_hub(model, k, row, pr)?;
        pr.iter_mut().for_each(|v| *v *= k.sqrt_kappa);
        Ok(())
    })?;
    Ok(UnitPoints { n, d, p: std::borrow::Cow::Owned(p), g })
}

/// Checks weights: length n, finite, non-negative.
pub fn check_weights(w: &[f64], n: usize) -> Result<()> {
    if w.len() != n {
        return Err(Error::Value(format!("weights has length {} but x has {n} points", w.len())));
    }
    if let Some(i) = w.iter().position(|v| !v.is_finite() || *v < 0.0) {
        return Err(Error::Value(format!("weights: entry {i} is {} (weights must be finite and >= 0)", w[i])));
    }
    Ok(())
}

/// Checked weights divided by their maximum (the means are invariant under
/// scaling, and this keeps sums of weighted squares from under- or
/// overflowing for weights like 1e-200 or 1e300).
fn normalized(weights: Option<&[f64]>, n: usize) -> Result<Option<Vec<f64>>> {
    match weights {
        None => Ok(None),
        Some(w) => {
            check_weights(w, n)?;
            let f = weight_factor(w.iter().fold(0.0f64, |a, &b| a.max(b)));
            Ok(Some(w.iter().map(|v| v * f).collect()))
        }
    }
}

/// The factor weights are scaled by, from their maximum: a power of two, so
/// exact, and any subset scaled by a different power gives bit-identical
/// means (per-label = separate means). 1 when all weights are zero.
pub(crate) fn weight_factor(max: f64) -> f64 {
    if max == 0.0 {
        1.0
    } else {
        crate::numeric::pow2(-crate::numeric::scale_exponent_of(max))
    }
}

/// Groups: the sorted distinct labels and, for each, the point indices in
/// input order.
pub fn groups(labels: Option<&[i64]>, n: usize) -> Result<(Vec<i64>, Vec<Vec<usize>>)> {
    match labels {
        None => Ok((vec![0], vec![(0..n).collect()])),
        Some(l) => {
            if l.len() != n {
                return Err(Error::Value(format!("labels has length {} but x has {n} points", l.len())));
            }
            let mut order: Vec<usize> = (0..n).collect();
            order.sort_by_key(|&i| (l[i], i));
            let mut keys = Vec::new();
            let mut members: Vec<Vec<usize>> = Vec::new();
            for i in order {
                if keys.last() != Some(&l[i]) {
                    keys.push(l[i]);
                    members.push(Vec::new());
                }
                members.last_mut().unwrap().push(i);
            }
            Ok((keys, members))
        }
    }
}

/// The Einstein sums `(sum w 2p'/g', sum w (2 - g')/g')` of the members
/// translated by `-c` (`p' = (-c) ⊕ p`, exact gap carried; `c = None` is no
/// translation).
pub(crate) fn einstein_sums(
    pts: &UnitPoints,
    idx: &[usize],
    w: Option<&[f64]>,
    c: Option<(&[f64], f64)>,
) -> (Vec<f64>, f64) {
    let d = pts.d;
    let unit = Curvature::default();
    let parts: Vec<(Vec<f64>, f64)> = idx
        .par_chunks(CHUNK)
        .map(|ch| {
            let mut num = vec![0f64; d];
            let mut den = 0.0;
            let mut q = vec![0f64; d];
            for &i in ch {
                let wi = w.map_or(1.0, |w| w[i]);
                if wi == 0.0 {
                    continue;
                }
                let p = &pts.p[i * d..(i + 1) * d];
                let g = match c {
                    None => {
                        q.copy_from_slice(p);
                        pts.g[i]
                    }
                    Some((cv, cg)) => poincare::add_g(&unit, cv, cg, p, pts.g[i], -1.0, &mut q),
                };
                // (-c) ⊕ p = -(c ⊖ p): the sign is restored below.
                let f = wi * 2.0 / g;
                for (a, &b) in num.iter_mut().zip(q.iter()) {
                    *a += f * b;
                }
                den += wi * (2.0 - g) / g;
            }
            (num, den)
        })
        .collect();
    let mut num = vec![0f64; d];
    let mut den = 0.0;
    for (a, b) in parts {
        num.iter_mut().zip(&a).for_each(|(x, y)| *x += y);
        den += b;
    }
    if c.is_some() {
        num.iter_mut().for_each(|v| *v = -*v);
    }
    (num, den)
}

/// Klein sums to the Poincaré point with its gap.
pub(crate) fn einstein_point(mut num: Vec<f64>, den: f64) -> (Vec<f64>, f64) {
    num.iter_mut().for_each(|v| *v /= den);
    let gk = (1.0 - crate::numeric::sumsq_dd(&num).value()).max(0.0);
    let g = crate::models::klein::to_poincare_in_place(&mut num, gk);
    (num, g)
}

/// Unit-ball Einstein midpoint of the members (with their weights), as a
/// Poincaré point and its exact gap. The direct sums cancel when the result
/// lies far from the origin (its Klein gap, `1 - |m_K|^2`, is a difference of
/// nearly equal numbers), so then the members are translated by a member
/// `c` first (`(-c) ⊕ x`, gaps carried), averaged near the origin, and the
/// result translated back: the gyrocentroid commutes with gyrotranslations
/// (Ungar).
fn einstein_unit(pts: &UnitPoints, idx: &[usize], w: Option<&[f64]>) -> Option<(Vec<f64>, f64)> {
    super::partial::run(pts, idx, w, None).map(|r| (r.mu, r.gap))
}

/// Gradient, Hessian and objective at `mu` (unit ball) over the members.
#[derive(Clone)]
pub struct Stats {
    pub grad: Vec<f64>,
    /// Upper triangle of the outer-product part, row-major `d x d`.
    pub hout: Vec<f64>,
    pub hscal: f64,
    pub f: f64,
    pub wsum: f64,
}

impl Stats {
    pub(crate) fn zero(d: usize) -> Stats {
        Stats { grad: vec![0f64; d], hout: vec![0f64; d * d], hscal: 0.0, f: 0.0, wsum: 0.0 }
    }

    /// Adds `o` (chunk sums are added in chunk order: deterministic).
    pub(crate) fn add(&mut self, o: &Stats) {
        self.grad.iter_mut().zip(&o.grad).for_each(|(a, b)| *a += b);
        self.hout.iter_mut().zip(&o.hout).for_each(|(a, b)| *a += b);
        self.hscal += o.hscal;
        self.f += o.f;
        self.wsum += o.wsum;
    }
}

/// Members per block of the statistics kernel: the long dependency chain of
/// one point's terms (division, square root, logarithm) overlaps with 15
/// others, and the sums run in 16 lanes.
pub(crate) const LANES: usize = 16;

/// Lanes of the Hessian's accumulators: a block's 16 products of an entry
/// are first summed into 4 (in registers), then added to the entry's 4
/// running sums (one load and one store per entry and block, not four).
pub(crate) const HL: usize = 4;

/// Adds a block's `sum_l fh_l y_l y_l^T` to `hacc`: the upper triangle, row
/// by row, `HL` lanes per entry (`d (d + 1) / 2 * HL` values); `ys` holds
/// `y`'s coordinates, `LANES` lanes per row. Shared by the statistics
/// kernels of the centroids and of k-means.
#[inline(always)]
pub(crate) fn add_hessian_block(fh: &[f64; LANES], ys: &[f64], d: usize, hacc: &mut [f64]) {
    let row = |r: usize| -> &[f64; LANES] { ys[r * LANES..(r + 1) * LANES].try_into().expect("lanes") };
    let mut e = 0;
    for r in 0..d {
        let yr = row(r);
        let mut hr = [0f64; LANES];
        for l in 0..LANES {
            hr[l] = fh[l] * yr[l];
        }
        for s2 in r..d {
            let ys2 = row(s2);
            let mut t = [0f64; HL];
            for q in 0..HL {
                t[q] = hr[q] * ys2[q];
            }
            for g in 1..LANES / HL {
                for q in 0..HL {
                    t[q] = hr[g * HL + q].mul_add(ys2[g * HL + q], t[q]);
                }
            }
            let acc: &mut [f64; HL] = (&mut hacc[e * HL..(e + 1) * HL]).try_into().expect("HL lanes");
            for q in 0..HL {
                acc[q] += t[q];
            }
            e += 1;
        }
    }
}

/// Adds the lane sums of `hacc` (see [`add_hessian_block`]) to the full
/// `d x d` matrix `hout` (the lower triangle mirrors the upper).
pub(crate) fn add_hessian_sums(hacc: &[f64], d: usize, hout: &mut [f64]) {
    let mut e = 0;
    for r in 0..d {
        for s2 in r..d {
            let v = hacc[e * HL..(e + 1) * HL].iter().fold(0.0, |x, y| x + y);
            e += 1;
            hout[r * d + s2] += v;
            if s2 != r {
                hout[s2 * d + r] += v;
            }
        }
    }
}

/// Newton statistics of the members `idx` at `mu` (the gradient `sum w d/t
/// y`, the Hessian's parts `sum w d coth d` and `sum w (1 - d coth d)/t^2
/// y y^T` with `y = (-mu) ⊕ x`, `t = |y|`, `d = 2 artanh t`), 16 members at a time (consecutive in `idx`, so
/// the grouping depends only on the member list), summed lane by lane over
/// each chunk and the lanes added in order (upper triangle of the outer
/// products, mirrored). Members of weight zero add nothing.
pub(crate) fn stats(pts: &UnitPoints, idx: &[usize], w: Option<&[f64]>, mu: &[f64], gmu: f64) -> Stats {
    let d = pts.d;
    let parts: Vec<Stats> = idx
        .par_chunks(CHUNK)
        .map(|ch| {
            crate::numeric::simd::dispatch(
                crate::numeric::simd::has_fma(),
                #[inline(always)]
                || lane_stats(pts, ch, w, mu, gmu),
            )
        })
        .collect();
    let mut tot = Stats::zero(d);
    for p in parts {
        tot.add(&p);
    }
    tot
}

#[inline(always)]
fn lane_stats(pts: &UnitPoints, ch: &[usize], w: Option<&[f64]>, mu: &[f64], gmu: f64) -> Stats {
    const B: usize = LANES;
    let d = pts.d;
    // lane accumulators: wsum, f, hscal, grad (d); the Hessian's upper
    // triangle in `hacc`; `ys` flat, B lanes per coordinate
    let mut acc = vec![[0f64; B]; 3 + d];
    let mut hacc = vec![0f64; d * (d + 1) / 2 * HL];
    let mut ys = vec![0f64; d * B];
    for blk in ch.chunks(B) {
        let m = blk.len();
        let mut idx = [0usize; B];
        let mut wl = [0f64; B];
        for l in 0..B {
            idx[l] = blk[l.min(m - 1)];
            wl[l] = if l < m { w.map_or(1.0, |w| w[idx[l]]) } else { 0.0 };
        }
        let mut gp = [0f64; B];
        for l in 0..B {
            gp[l] = pts.g[idx[l]];
        }
        // s = x - mu, |s|^2
        let mut ss = [0f64; B];
        for (t, yt) in ys.chunks_exact_mut(B).enumerate() {
            let mt = mu[t];
            for l in 0..B {
                let s = pts.p[idx[l] * d + t] - mt;
                yt[l] = s;
                ss[l] = s.mul_add(s, ss[l]);
            }
        }
        // y = (-mu) ⊕ x = (g_mu s - |s|^2 mu) / D, D = g_mu g_x + |s|^2, its
        // gap g_mu g_x / D: one division for 1/D and the inverse gap
        let mut a = [0f64; B];
        let mut b = [0f64; B];
        let mut igy = [0f64; B];
        for l in 0..B {
            let gg = gmu * gp[l];
            let den = gg + ss[l];
            let inv = 1.0 / (gg * den);
            let r = gg * inv;
            a[l] = gmu * r;
            b[l] = ss[l] * r;
            igy[l] = den * den * inv;
        }
        let mut t2 = [0f64; B];
        for (t, yt) in ys.chunks_exact_mut(B).enumerate() {
            let mt = mu[t];
            for l in 0..B {
                let y = a[l] * yt[l] - b[l] * mt;
                yt[l] = y;
                t2[l] = y.mul_add(y, t2[l]);
            }
        }
        // d = 2 artanh t = log1p(2t (1 + t) / g_y); d coth d with
        // coth(2 artanh t) = (1 + t^2)/(2t); a member on mu adds its weight
        // to the scalar part only; a zero weight (and padding) adds nothing.
        let mut c = [0f64; B];
        let mut fg = [0f64; B];
        let mut fh = [0f64; B];
        let mut f = [0f64; B];
        for l in 0..B {
            let tt = t2[l].sqrt();
            let zero = tt == 0.0;
            let dv = log1p_fast(2.0 * tt * (1.0 + tt) * igy[l]);
            let it = 1.0 / tt;
            let q = dv * it;
            let cc = 0.5 * q * (1.0 + t2[l]);
            let wi = wl[l];
            c[l] = wi * if zero { 1.0 } else { cc };
            fg[l] = if zero { 0.0 } else { wi * q };
            fh[l] = if zero { 0.0 } else { wi * (((1.0 - cc) * it) * it) };
            f[l] = if zero { 0.0 } else { wi * (dv * dv) };
        }
        for (q, v) in [wl, f, c].iter().enumerate() {
            for l in 0..B {
                acc[q][l] += v[l];
            }
        }
        for t in 0..d {
            let yt = &ys[t * B..(t + 1) * B];
            let r = &mut acc[3 + t];
            for l in 0..B {
                r[l] = fg[l].mul_add(yt[l], r[l]);
            }
        }
        add_hessian_block(&fh, &ys, d, &mut hacc);
    }
    let sum = |v: &[f64; B]| v.iter().fold(0.0, |x, y| x + y);
    let mut st = Stats::zero(d);
    st.wsum = sum(&acc[0]);
    st.f = sum(&acc[1]);
    st.hscal = sum(&acc[2]);
    for t in 0..d {
        st.grad[t] = sum(&acc[3 + t]);
    }
    add_hessian_sums(&hacc, d, &mut st.hout);
    st
}

/// Solves `(hscal I + hout) s = g` by Cholesky (the matrix is symmetric
/// positive definite: every `d coth d >= 1` and `1 - c <= 0` only shrinks the
/// radial part down to the weight itself).
fn newton_step(st: &Stats, d: usize) -> Vec<f64> {
    let mut a = vec![0f64; d * d];
    for r in 0..d {
        for s in r..d {
            // symmetrise (the accumulated halves agree to rounding)
            let v = 0.5 * (st.hout[r * d + s] + st.hout[s * d + r]) + if r == s { st.hscal } else { 0.0 };
            a[r * d + s] = v;
            a[s * d + r] = v;
        }
    }
    // Cholesky: a = L L^T
    for j in 0..d {
        let mut diag = a[j * d + j];
        for k in 0..j {
            diag -= a[j * d + k] * a[j * d + k];
        }
        let l = diag.max(f64::MIN_POSITIVE).sqrt();
        a[j * d + j] = l;
        for i in (j + 1)..d {
            let mut v = a[i * d + j];
            for k in 0..j {
                v -= a[i * d + k] * a[j * d + k];
            }
            a[i * d + j] = v / l;
        }
    }
    let mut z = st.grad.clone();
    for i in 0..d {
        for k in 0..i {
            z[i] -= a[i * d + k] * z[k];
        }
        z[i] /= a[i * d + i];
    }
    for i in (0..d).rev() {
        for k in (i + 1)..d {
            z[i] -= a[k * d + i] * z[k];
        }
        z[i] /= a[i * d + i];
    }
    z
}

/// `mu ⊕ exp_0(scale * s)` in the unit ball, with its gap.
fn step(mu: &[f64], gmu: f64, s: &[f64], scale: f64) -> (Vec<f64>, f64) {
    let unit = Curvature::default();
    let n = sumsq(s).sqrt() * scale;
    if n == 0.0 {
        return (mu.to_vec(), gmu);
    }
    let f = (0.5 * n).tanh() / n * scale;
    let w: Vec<f64> = s.iter().map(|v| v * f).collect();
    let mut out = vec![0f64; mu.len()];
    let g = poincare::add_g(&unit, mu, gmu, &w, sech2(0.5 * n), 1.0, &mut out);
    (out, g)
}

/// One group's Fréchet mean.
pub struct GroupMean {
    pub mu: Vec<f64>,
    pub gap: f64,
    pub iterations: usize,
    pub converged: bool,
    pub grad_norm: f64,
    /// `sum w d^2 / sum w` at `mu` (unit ball: times R^2 for the model).
    pub var: f64,
}

pub(crate) fn frechet_group(
    pts: &UnitPoints,
    idx: &[usize],
    w: Option<&[f64]>,
    tol: f64,
    max_iter: usize,
) -> Option<GroupMean> {
    super::partial::run(pts, idx, w, Some((tol, max_iter)))
}

/// mu, gap, step, scale, grad norm of the last full Newton step.
type PrevStep = (Vec<f64>, f64, Vec<f64>, f64, f64);

/// The state of one Riemannian Newton iteration for a Fréchet mean, fed the
/// statistics at its current iterate by whoever makes the passes over the
/// points ([`newton_from`] for one group; k-means for all its clusters in
/// one pass).
pub(crate) struct Newton {
    pub mu: Vec<f64>,
    pub gmu: f64,
    prev: Option<PrevStep>,
    iterations: usize,
    tol: f64,
    max_iter: usize,
    pub(crate) last_step: f64,
    pub result: Option<GroupMean>,
}

impl Newton {
    /// Starts at the unit-ball point `mu` with gap `gmu`. `last_step > 0`
    /// ends the iteration after a full Newton step of hyperbolic length at
    /// most `last_step` (unit ball) without evaluating the gradient there: in
    /// the quadratic regime the step leaves an error of order `last_step^2`
    /// (k-means uses it for its intermediate centres); `0` always verifies
    /// `tol`.
    pub(crate) fn new(mu: Vec<f64>, gmu: f64, tol: f64, max_iter: usize, last_step: f64) -> Newton {
        Newton { mu, gmu, prev: None, iterations: 0, tol, max_iter, last_step, result: None }
    }

    fn finish(&mut self, converged: bool, gn: f64, var: f64) {
        let mu = std::mem::take(&mut self.mu);
        self.result = Some(GroupMean { mu, gap: self.gmu, iterations: self.iterations, converged, grad_norm: gn, var });
    }

    /// Takes the statistics at `self.mu` (positive total weight); returns
    /// whether it needs the statistics at the new `self.mu` (otherwise
    /// `result` is set).
    pub(crate) fn advance(&mut self, st: &Stats) -> bool {
        let d = st.grad.len();
        let gn = sumsq(&st.grad).sqrt() / st.wsum;
        let var = st.f / st.wsum;
        if gn <= self.tol {
            self.finish(true, gn, var);
            return false;
        }
        if let Some((pm, pg, ps, sc, pgn)) = &self.prev {
            if gn > *pgn && *sc > 1e-6 {
                // Worse than before: retry the previous step at half length.
                let scale = sc * 0.5;
                let (m2, g2) = step(pm, *pg, ps, scale);
                self.mu = m2;
                self.gmu = g2;
                self.prev = Some((pm.clone(), *pg, ps.clone(), scale, *pgn));
                return true;
            }
        }
        if self.iterations >= self.max_iter {
            self.finish(false, gn, var);
            return false;
        }
        self.iterations += 1;
        let s = newton_step(st, d);
        // Beyond ~11 R from the origin one ulp of the coordinates is more
        // than 1e-12 R of hyperbolic distance: a step below the coordinate
        // resolution at mu cannot be taken, so the iterate is final.
        let res = 2.0 * f64::EPSILON * (sumsq(&self.mu).sqrt() * 2.0 / self.gmu + 1.0);
        let sn = sumsq(&s).sqrt();
        if sn <= 4.0 * res {
            self.finish(true, gn, var);
            return false;
        }
        let (m2, g2) = step(&self.mu, self.gmu, &s, 1.0);
        let halving = self.prev.as_ref().is_some_and(|p| p.3 < 1.0);
        if !halving && sn <= self.last_step {
            self.mu = m2;
            self.gmu = g2;
            self.finish(true, gn, f64::NAN);
            return false;
        }
        let old = std::mem::replace(&mut self.mu, m2);
        self.prev = Some((old, self.gmu, s, 1.0, gn));
        self.gmu = g2;
        true
    }
}

/// Result of [`frechet_mean`]: one row per group (a single group without
/// labels), coordinates in the input model.
pub struct MeanResult {
    pub labels: Vec<i64>,
    pub width: usize,
    pub mean: Vec<f64>,
    pub iterations: Vec<usize>,
    pub converged: Vec<bool>,
    pub grad_norm: Vec<f64>,
}

pub(crate) fn to_model(model: Model, k: &Curvature, mu: &[f64], gap: f64, out: &mut [f64]) {
    let p: Vec<f64> = mu.iter().map(|v| v * k.radius).collect();
    from_hub(model, k, &p, gap, out);
}

fn empty_group(key: i64, labelled: bool) -> Error {
    if labelled {
        Error::Value(format!("label {key}: its points all have weight zero (an empty group has no mean)"))
    } else {
        Error::Value("weights are all zero: the mean of no points is undefined".to_string())
    }
}

/// The weighted Fréchet mean `argmin sum w d(mu, x)^2`, per label.
pub fn frechet_mean(
    model: Model,
    k: Curvature,
    x: &Data,
    weights: Option<&[f64]>,
    labels: Option<&[i64]>,
    tol: f64,
    max_iter: usize,
) -> Result<MeanResult> {
    if !(tol >= 0.0) {
        return Err(Error::Value(format!("tol must be >= 0, got {tol}")));
    }
    let pts = unit_points(model, &k, "x", x)?;
    let wn = normalized(weights, pts.n)?;
    let weights = wn.as_deref();
    let (keys, members) = groups(labels, pts.n)?;
    let width = model.width(pts.d);
    let res: Vec<Option<GroupMean>> =
        members.par_iter().map(|idx| frechet_group(&pts, idx, weights, tol, max_iter)).collect();
    let mut out = MeanResult {
        labels: keys.clone(),
        width,
        mean: vec![0f64; keys.len() * width],
        iterations: Vec::new(),
        converged: Vec::new(),
        grad_norm: Vec::new(),
    };
    for (gi, r) in res.into_iter().enumerate() {
        let r = r.ok_or_else(|| empty_group(keys[gi], labels.is_some()))?;
        to_model(model, &k, &r.mu, r.gap, &mut out.mean[gi * width..(gi + 1) * width]);
        out.iterations.push(r.iterations);
        out.converged.push(r.converged);
        out.grad_norm.push(r.grad_norm);
    }
    Ok(out)
}

/// The weighted Einstein midpoint (gyrocentroid), per label, in the input
/// model. Returns (labels, row-major means).
pub fn einstein_midpoint(
    model: Model,
    k: Curvature,
    x: &Data,
    weights: Option<&[f64]>,
    labels: Option<&[i64]>,
) -> Result<(Vec<i64>, Vec<f64>, usize)> {
    let pts = unit_points(model, &k, "x", x)?;
    let wn = normalized(weights, pts.n)?;
    let weights = wn.as_deref();
    let (keys, members) = groups(labels, pts.n)?;
    let width = model.width(pts.d);
    let res: Vec<Option<(Vec<f64>, f64)>> = members.par_iter().map(|idx| einstein_unit(&pts, idx, weights)).collect();
    let mut mean = vec![0f64; keys.len() * width];
    for (gi, r) in res.into_iter().enumerate() {
        let (mu, gap) = r.ok_or_else(|| empty_group(keys[gi], labels.is_some()))?;
        to_model(model, &k, &mu, gap, &mut mean[gi * width..(gi + 1) * width]);
    }
    Ok((keys, mean, width))
}

/// Where the Fréchet variance is taken.
pub enum Center<'a> {
    /// About each group's own Fréchet mean.
    Mean { tol: f64, max_iter: usize },
    /// About given points in the model's coordinates: one row for every
    /// group, or one row per group (row-major, `rows x width`).
    Given { coords: &'a [f64], rows: usize },
}

/// `sum w d(c, x)^2 / sum w` per label (one group without labels), in one
/// pass over each group's points. Returns the sorted labels and the
/// variances.
pub fn frechet_variance(
    model: Model,
    k: Curvature,
    x: &Data,
    center: Center,
    weights: Option<&[f64]>,
    labels: Option<&[i64]>,
) -> Result<(Vec<i64>, Vec<f64>)> {
    let pts = unit_points(model, &k, "x", x)?;
    let wn = normalized(weights, pts.n)?;
    let weights = wn.as_deref();
    let (keys, members) = groups(labels, pts.n)?;
    let width = model.width(pts.d);
    let r2 = k.radius * k.radius;
    let res: Vec<Option<f64>> = match center {
        Center::Mean { tol, max_iter } => {
            if tol.is_nan() || tol < 0.0 {
                return Err(Error::Value(format!("tol must be >= 0, got {tol}")));
            }
            members.par_iter().map(|idx| frechet_group(&pts, idx, weights, tol, max_iter).map(|r| r.var)).collect()
        }
        Center::Given { coords, rows } => {
            if rows == 0 || coords.len() != rows * width {
                return Err(Error::Value(format!(
                    "center has {} coordinates but x has {width} per point",
                    coords.len() / rows.max(1)
                )));
            }
            if rows != 1 && rows != keys.len() {
                return Err(Error::Value(format!(
                    "center has {rows} rows but there are {} labels (give one center, or one per label)",
                    keys.len()
                )));
            }
            let mut hub = vec![0f64; rows * pts.d];
            let mut gaps = vec![0f64; rows];
            for r in 0..rows {
                let mu = &mut hub[r * pts.d..(r + 1) * pts.d];
                let gmu = to_hub(model, &k, &coords[r * width..(r + 1) * width], mu).map_err(|f| {
                    let (shape, row) = if rows > 1 { (vec![rows, width], vec![r]) } else { (vec![width], vec![]) };
                    crate::error::row_error("center", &shape, &row, f, false)
                })?;
                mu.iter_mut().for_each(|v| *v *= k.sqrt_kappa);
                gaps[r] = gmu;
            }
            members
                .par_iter()
                .enumerate()
                .map(|(gi, idx)| {
                    let r = if rows == 1 { 0 } else { gi };
                    let st = stats(&pts, idx, weights, &hub[r * pts.d..(r + 1) * pts.d], gaps[r]);
                    if st.wsum > 0.0 {
                        Some(st.f / st.wsum)
                    } else {
                        None
                    }
                })
                .collect()
        }
    };
    let mut out = Vec::with_capacity(keys.len());
    for (gi, v) in res.into_iter().enumerate() {
        out.push(v.ok_or_else(|| empty_group(keys[gi], labels.is_some()))? * r2);
    }
    Ok((keys, out))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// One member's terms, point by point: the formulas of Pennec's exact
    /// Hessian as the module docs give them (gradient `w d/t y`, scalar part
    /// `w d coth d`, outer part `w (1 - d coth d)/t^2 y y^T`, `f = w d^2`),
    /// with `y = (-mu) ⊕ x` by Möbius addition and `d = 2 artanh t`
    /// (std's `atanh`): the reference of the lane kernel.
    fn reference(p: &[f64], mu: &[f64], w: f64, st: &mut Stats) {
        let d = mu.len();
        let dot = |a: &[f64], b: &[f64]| a.iter().zip(b).map(|(x, y)| x * y).sum::<f64>();
        let nm: Vec<f64> = mu.iter().map(|v| -v).collect();
        // Möbius addition (-mu) ⊕ p (Ungar)
        let (xy, xx, yy) = (dot(&nm, p), dot(&nm, &nm), dot(p, p));
        let den = 1.0 + 2.0 * xy + xx * yy;
        let y: Vec<f64> = (0..d).map(|t| ((1.0 + 2.0 * xy + yy) * nm[t] + (1.0 - xx) * p[t]) / den).collect();
        let t = dot(&y, &y).sqrt();
        st.wsum += w;
        if t == 0.0 {
            st.hscal += w;
            return;
        }
        let dist = 2.0 * t.atanh();
        let c = dist / dist.tanh();
        st.f += w * dist * dist;
        st.hscal += w * c;
        for r in 0..d {
            st.grad[r] += w * dist / t * y[r];
            for s in 0..d {
                st.hout[r * d + s] += w * (1.0 - c) / (t * t) * y[r] * y[s];
            }
        }
    }

    #[test]
    fn lane_statistics_match_the_point_by_point_formulas() {
        let (n, d) = (37, 3); // two full blocks of 16 and a partial one
        let mut s = 11u64;
        let mut u = || {
            s = s.wrapping_mul(6364136223846793005).wrapping_add(1442695040888963407);
            (s >> 11) as f64 / (1u64 << 53) as f64
        };
        let mut x = Vec::new();
        for _ in 0..n {
            let v: Vec<f64> = (0..d).map(|_| u() - 0.5).collect();
            let nv = v.iter().map(|a| a * a).sum::<f64>().sqrt();
            let r = (0.5 * 4.0 * u()).tanh();
            x.extend(v.iter().map(|a| a / nv * r));
        }
        let mu = x[5 * d..6 * d].to_vec(); // member 5 lies on mu
        let mut w: Vec<f64> = (0..n).map(|_| 0.5 + u()).collect();
        w[9] = 0.0; // adds nothing
        let a = ndarray::ArrayView2::from_shape((n, d), &x[..]).unwrap().into_dyn();
        let data = Data::F64(a);
        let pts = unit_points(Model::Poincare, &Curvature::default(), "x", &data).unwrap();
        let gmu = crate::models::ball::checked_gap(&Curvature::default(), &mu).unwrap().value();
        let idx: Vec<usize> = (0..n).rev().collect(); // any member order
        let got = stats(&pts, &idx, Some(&w), &mu, gmu);
        let mut want = Stats::zero(d);
        for &i in &idx {
            if w[i] > 0.0 {
                reference(&x[i * d..(i + 1) * d], &mu, w[i], &mut want);
            }
        }
        let close = |a: f64, b: f64, scale: f64| (a - b).abs() <= 1e-13 * scale;
        assert!(close(got.wsum, want.wsum, want.wsum));
        assert!(close(got.f, want.f, want.f), "{} {}", got.f, want.f);
        assert!(close(got.hscal, want.hscal, want.hscal));
        let gs = want.grad.iter().map(|v| v.abs()).sum::<f64>();
        assert!(got.grad.iter().zip(&want.grad).all(|(a, b)| close(*a, *b, gs)), "{:?} {:?}", got.grad, want.grad);
        let hs = want.hout.iter().map(|v| v.abs()).sum::<f64>();
        assert!(got.hout.iter().zip(&want.hout).all(|(a, b)| close(*a, *b, hs)), "{:?} {:?}", got.hout, want.hout);
        // the lane grouping depends on the member list only: bit-identical
        // when run again
        let again = stats(&pts, &idx, Some(&w), &mu, gmu);
        assert_eq!(again.grad, got.grad);
        assert_eq!(again.hout, got.hout);
    }
}
