//! k-means in hyperbolic space: Lloyd's algorithm with exact distances and
//! Fréchet-mean centres, the whole fit in one call.
//!
//! The points are read and validated once into the unit Poincaré ball with
//! their exact gaps ([`unit_points`], the hub representation shared with the
//! centroids), whatever the input model. Then, per run:
//!
//! 1. Seeding ([`Init`]): greedy k-means++ (the first centre uniform; for
//!    each further one, [`greedy_trials`] candidates drawn by D^2 sampling,
//!    Arthur & Vassilvitskii 2007: each with probability proportional to the
//!    squared distance to the nearest centre so far; the candidate that
//!    leaves the smallest sum of those squared distances is kept; one
//!    candidate is plain k-means++; when every point already coincides with
//!    a centre, uniformly among the points not chosen yet), `n_clusters`
//!    distinct points uniformly, or given centres.
//! 2. Assignment: every point to its nearest centre, ranked by the pair
//!    quantity `h = sinh(d/2R)^2 = |x - c|^2 / (g_x g_c)` (unit ball; monotone
//!    in the distance, evaluated in the order of `pairwise::scaled_h`, so a
//!    Poincaré fit at K = -1 agrees bit for bit with `knn`), ties to the lower
//!    centre index; the distance `R acosh(1 + 2h)` only for the winner.
//! 3. Empty clusters, in increasing index: the point farthest from its centre
//!    among the clusters of at least two points (lowest index on ties) moves
//!    into the empty cluster and becomes its centre.
//! 4. Update: each centre whose points changed becomes the Fréchet mean of
//!    its points, by the Riemannian Newton iteration of
//!    [`centroids`](super::centroids) started at the previous centre (a warm
//!    start); a centre whose points did not change stays. From its second
//!    update on, a cluster's first Newton step needs no pass over the
//!    points: at its centre the gradient of its previous points vanishes, so
//!    that of its new points is the moved points' (in minus out), and the
//!    Hessian is the one kept from its last pass plus and minus theirs.
//! 5. Stop when the labels no longer change, the squared centre movement
//!    `sum_j d(c_j, c_j')^2` is at most `tol` times the data's spread (the
//!    mean squared distance of the points to their Einstein midpoint,
//!    divided by the dimension: the analogue of the mean per-feature variance
//!    that Euclidean k-means scales its `tol` by; computed once per fit, only
//!    for `tol > 0`), or after `max_iter` updates; the last assignment gives
//!    `labels` and `inertia`.
//!
//! Each Lloyd iteration makes one assignment pass over the points (labels,
//! distances; it also sums the Newton statistics at their centres of the
//! clusters that changed the time before and have no kept statistics, the
//! first round of their next update), then one pass of statistics per
//! further Newton step of the changed clusters, all advancing together
//! (late in the run one; none when the kept-statistics step is below
//! `INTERMEDIATE_LAST_STEP`). The passes read the points transposed (once
//! per fit), 16 at a time: the assignment keeps the squared distances of a
//! block to every centre in registers; the statistics are summed per
//! cluster over 16 members at a time (members grouped by a counting sort
//! per chunk, done once in the assignment pass and kept for the update's
//! passes), lane by lane (the Hessian's entries in four lanes: a block's
//! sixteen products summed in registers first, so each entry costs one
//! load and one store per block), and the lanes added in order at the end
//! of the chunk. On the benchmark's taxonomy (36 607 x 10, 45 iterations) the
//! assignment passes gather nothing after the first update, and the fit
//! makes 64 passes of statistics where it made the same 64 plus the
//! statistics of all 45 assignment passes when every update started from
//! statistics at the centre.
//!
//! Randomness comes from [`Rng`] (xoshiro256**), one generator per run
//! seeded with a 64-bit seed given by the caller, so runs are independent and
//! reproducible. Every reduction runs over fixed chunks summed in order:
//! results are bit-identical for any number of threads.

use std::collections::HashMap;

use rayon::prelude::*;

use super::centroids::{
    add_hessian_block, add_hessian_sums, frechet_group, stats, to_model, unit_points, Newton, Stats, UnitPoints, HL,
    LANES,
};
use crate::batch::Data;
use crate::error::{Error, Result};
use crate::models::ball::{checked_gap, Curvature};
use crate::models::Model;
use crate::numeric::simd::{dispatch, has_fma};
use crate::numeric::{acosh1p2_fast, log1p_fast};
use crate::pairwise::{scaled_h, seq_dist_sq};

/// Points per parallel chunk of the seeding (fixed: results never depend on
/// threads; the running sums of the D^2 draw are grouped by it).
const SEED_CHUNK: usize = 4096;
/// Points per parallel chunk of the Lloyd passes (fixed: results never
/// depend on threads; a power of two). Large enough that the partly filled
/// last block of each cluster wastes few lanes and the per-chunk cluster
/// sums cost little, small enough that two threads share 18 chunks of
/// 36 607 points evenly.
const CHUNK: usize = 2048;
/// Points per block of the fused kernels: two AVX-512 registers of lanes
/// (four AVX2 ones), so that the long dependency chain of one point's
/// statistics (division, square root, logarithm) overlaps with 15 others
/// (measured: 16 lanes take 0.6-0.75 of the time of 8, 32 lanes more than 16).
const B: usize = LANES;
/// Half a block (the ranking's register blocking, see [`nearest`]).
const H: usize = B / 2;
/// Gradient tolerance of the Newton iteration for each centre (the default
/// of `frechet_mean`), and its iteration cap.
const CENTRE_TOL: f64 = 1e-12;
const CENTRE_MAX_ITER: usize = 50;
/// The intermediate centres of Lloyd's loop end after a Newton step of at
/// most this hyperbolic length (unit ball), unverified: in Newton's
/// quadratic regime they are then within ~1e-10 R of the cluster's mean
/// (enough to rank points; the inertia is off by ~1e-20 per point), and the
/// final centres are recomputed in full.
const INTERMEDIATE_LAST_STEP: f64 = 1e-5;

/// The Newton iteration of an intermediate centre, started at the previous
/// centre `mu` (gap `gmu`); also used by gyrokit.dask's k-means
/// (`partial::Driver::from_newton`).
pub(crate) fn centre_newton(mu: Vec<f64>, gmu: f64) -> Newton {
    Newton::new(mu, gmu, CENTRE_TOL, CENTRE_MAX_ITER, INTERMEDIATE_LAST_STEP)
}

/// The pseudo-random generator of the seeding: xoshiro256** seeded by
/// SplitMix64 (`numeric::rng`).
pub use crate::numeric::rng::{splitmix64, Rng};

/// How a run's first centres are chosen.
pub enum Init<'a> {
    /// k-means++ with this many candidates per centre ([`greedy_trials`] is
    /// the default of `gyrokit.KMeans`; 1 is plain k-means++).
    PlusPlus(usize),
    Random,
    /// `(n_clusters, width)` centres in the input model.
    Given(Data<'a>),
}

/// Parameters of a fit.
pub struct Params {
    pub n_clusters: usize,
    pub max_iter: usize,
    /// Relative to the data's spread (see the module docs); 0: stop on
    /// unchanged labels (or `max_iter`) only.
    pub tol: f64,
}

/// The kept run (lowest inertia; the earlier run on ties).
pub struct Fit {
    pub width: usize,
    /// Row-major `(n_clusters, width)`, in the input model.
    pub centers: Vec<f64>,
    pub labels: Vec<i64>,
    pub inertia: f64,
    pub n_iter: usize,
    pub history: Vec<f64>,
}

/// Centres in the unit ball: coordinates, the gaps carried by the Newton
/// iteration, and `1/g` from the coordinates themselves (what the pairwise
/// kernels compute for the returned centres).
#[derive(Clone)]
struct Centres {
    d: usize,
    c: Vec<f64>,
    g: Vec<f64>,
    a: Vec<f64>,
}

impl Centres {
    fn new(d: usize) -> Centres {
        Centres { d, c: Vec::new(), g: Vec::new(), a: Vec::new() }
    }

    fn row(&self, j: usize) -> &[f64] {
        &self.c[j * self.d..(j + 1) * self.d]
    }

    fn push(&mut self, p: &[f64], g: f64) {
        self.c.extend_from_slice(p);
        self.g.push(g);
        self.a.push(recip_gap(p, g));
    }

    fn set(&mut self, j: usize, p: &[f64], g: f64) {
        let d = self.d;
        self.c[j * d..(j + 1) * d].copy_from_slice(p);
        self.g[j] = g;
        self.a[j] = recip_gap(p, g);
    }
}

/// `1/g` of a unit-ball point from its coordinates (as `Prepared` computes
/// it), falling back to the carried gap if the coordinates round onto the
/// sphere.
fn recip_gap(p: &[f64], g: f64) -> f64 {
    1.0 / checked_gap(&Curvature::default(), p).map(|v| v.value()).unwrap_or(g)
}

/// The hyperbolic distance (unit ball) of two unit-ball points with their
/// gaps, in the operations of the pairwise kernels.
fn unit_distance(a: &[f64], ga: f64, b: &[f64], gb: f64) -> f64 {
    acosh1p2_fast(scaled_h(seq_dist_sq(a, b), 1.0 / ga, 1.0 / gb, 1.0))
}

/// `h` between point `i` and a unit-ball point `c` with factor `ac`, one
/// point at a time (the reference of the tests).
#[cfg(test)]
fn h_point(pts: &UnitPoints, i: usize, c: &[f64], ac: f64) -> f64 {
    let d = pts.d;
    scaled_h(seq_dist_sq(&pts.p[i * d..(i + 1) * d], c), 1.0 / pts.g[i], ac, 1.0)
}

fn bad_points(model: Model, name: &str, e: Error) -> Error {
    let model = Model::NAMES[model as usize];
    Error::Value(format!("{name} is not a valid array of {model} points: {e}"))
}

// ---------------------------------------------------------------- seeding

/// `h` of the 16 points `base..base + B` and the unit-ball point `c` with
/// factor `ac` (transposed coordinates; the operations and order of
/// [`nearest`], which are those of `knn`).
#[inline(always)]
fn block_h(soa: &Soa, base: usize, c: &[f64], ac: f64) -> [f64; B] {
    let n = soa.n;
    let mut acc = [0f64; B];
    for (t, &ct) in c.iter().enumerate() {
        let xt = row(&soa.x[t * n + base..], 0);
        for l in 0..B {
            let u = xt[l] - ct;
            acc[l] = u.mul_add(u, acc[l]);
        }
    }
    let ax = row(&soa.ax[base..], 0);
    let mut h = [0f64; B];
    for l in 0..B {
        h[l] = scaled_h(acc[l], ax[l], ac, 1.0);
    }
    h
}

/// A lane's squared distance can only drop below its nearest one if its `h`
/// is below the nearest `h` times this: `d^2 = acosh(1 + 2h)^2` grows at
/// least like `h^(2 / ln(4h))` (relative change above 2.8e-12 for a relative
/// change of 1e-9 in `h`, up to the largest float), far more than the few
/// ulps of rounding of `acosh1p2_fast`, so a block of lanes all above it
/// keeps its values bit for bit without computing the distances.
const SKIP_MARGIN: f64 = 1.0 + 1e-9;

/// The squared unit distances of a block from its `h`, when some lane may
/// lower its nearest one (`hn`, as many lanes as the block holds points).
#[inline(always)]
fn block_d2(h: &[f64; B], hn: &[f64]) -> Option<[f64; B]> {
    let mut any = false;
    for (hl, &nl) in h.iter().zip(hn) {
        any |= *hl < nl * SKIP_MARGIN;
    }
    any.then(|| {
        let mut tv = [0f64; B];
        for l in 0..B {
            let t = acosh1p2_fast(h[l]);
            tv[l] = t * t;
        }
        tv
    })
}

/// Squared unit distances to the nearest chosen centre (`d2`, and the
/// nearest `h` in `hn`), lowered by centre `c`; returns the fixed-chunk sums
/// (each summed point by point in input order).
fn lower_d2(soa: &Soa, d2: &mut [f64], hn: &mut [f64], c: &[f64], ac: f64) -> Vec<f64> {
    d2.par_chunks_mut(SEED_CHUNK)
        .zip(hn.par_chunks_mut(SEED_CHUNK))
        .enumerate()
        .map(|(ci, (ch, hc))| {
            dispatch(
                has_fma(),
                #[inline(always)]
                || {
                    let i0 = ci * SEED_CHUNK;
                    let mut s = 0.0;
                    for (bi, (blk, hb)) in ch.chunks_mut(B).zip(hc.chunks_mut(B)).enumerate() {
                        let h = block_h(soa, i0 + bi * B, c, ac);
                        if let Some(tv) = block_d2(&h, hb) {
                            for ((v, n), (&t2, &hl)) in blk.iter_mut().zip(hb.iter_mut()).zip(tv.iter().zip(&h)) {
                                *v = v.min(t2);
                                *n = n.min(hl);
                            }
                        }
                        for &v in blk.iter() {
                            s += v;
                        }
                    }
                    s
                },
            )
        })
        .collect()
}

/// The potential `sum_i min(d2[i], d(x_i, c)^2)` of each candidate centre
/// `(c, 1/g)`, without changing `d2`: summed exactly as [`lower_d2`] sums
/// (fixed chunks, point by point, then the chunks in order), so the chosen
/// candidate's potential is the total of its [`lower_d2`] sums to the bit.
fn potentials(soa: &Soa, d2: &[f64], hn: &[f64], cands: &[(&[f64], f64)]) -> Vec<f64> {
    let parts: Vec<Vec<f64>> = d2
        .par_chunks(SEED_CHUNK)
        .zip(hn.par_chunks(SEED_CHUNK))
        .enumerate()
        .map(|(ci, (ch, hc))| {
            dispatch(
                has_fma(),
                #[inline(always)]
                || {
                    let i0 = ci * SEED_CHUNK;
                    let mut s = vec![0f64; cands.len()];
                    for (bi, (blk, hb)) in ch.chunks(B).zip(hc.chunks(B)).enumerate() {
                        for (sc, &(c, ac)) in s.iter_mut().zip(cands) {
                            let h = block_h(soa, i0 + bi * B, c, ac);
                            match block_d2(&h, hb) {
                                Some(tv) => blk.iter().zip(&tv).for_each(|(&v, &t2)| *sc += v.min(t2)),
                                None => blk.iter().for_each(|&v| *sc += v),
                            }
                        }
                    }
                    s
                },
            )
        })
        .collect();
    (0..cands.len()).map(|t| parts.iter().fold(0.0, |a, p| a + p[t])).collect()
}

/// Index drawn with probability `d2[i] / sum d2` (the first `i` whose
/// running sum exceeds `u * total`; the last positive entry if rounding
/// runs past the end).
fn draw_d2(d2: &[f64], sums: &[f64], u: f64) -> usize {
    let total: f64 = sums.iter().sum();
    let r = u * total;
    let mut acc = 0.0;
    for (ci, &s) in sums.iter().enumerate() {
        if acc + s > r {
            let ch = &d2[ci * SEED_CHUNK..(ci * SEED_CHUNK + SEED_CHUNK).min(d2.len())];
            let mut a2 = acc;
            for (k, &v) in ch.iter().enumerate() {
                a2 += v;
                if a2 > r {
                    return ci * SEED_CHUNK + k;
                }
            }
            if let Some(k) = ch.iter().rposition(|&v| v > 0.0) {
                return ci * SEED_CHUNK + k;
            }
        }
        acc += s;
    }
    d2.iter().rposition(|&v| v > 0.0).unwrap_or(0)
}

/// The `m`-th index (from 0) not in `chosen`.
fn nth_free(chosen: &[usize], m: usize) -> usize {
    let mut sorted = chosen.to_vec();
    sorted.sort_unstable();
    let mut i = m;
    for &c in &sorted {
        if c <= i {
            i += 1;
        } else {
            break;
        }
    }
    i
}

/// The candidates per centre of the greedy k-means++ seeding: `2 + floor(ln
/// k)` (Arthur & Vassilvitskii 2007, section 6, suggest O(log k); this
/// count is the common practice of scikit-learn's `kmeans_plusplus`).
pub fn greedy_trials(k: usize) -> usize {
    2 + (k.max(1) as f64).ln().floor() as usize
}

/// k-means++ seeding: indices of the chosen points. The first centre is
/// uniform; each further one is the best of `trials` candidates drawn by
/// D^2 sampling (each with probability proportional to its squared distance
/// to the nearest centre so far): the one that leaves the smallest sum of
/// those squared distances (the first on ties). One trial is plain k-means++
/// (Arthur & Vassilvitskii 2007); when every point already coincides with a
/// centre, the next is uniform among the points not chosen yet.
fn plusplus(pts: &UnitPoints, soa: &Soa, k: usize, trials: usize, rng: &mut Rng) -> Vec<usize> {
    let n = pts.n;
    let d = pts.d;
    let trials = trials.max(1);
    let mut chosen = vec![rng.below(n as u64) as usize];
    let mut d2 = vec![f64::INFINITY; n];
    let mut hn = vec![f64::INFINITY; n];
    let mut last = chosen[0];
    let centre = |i: usize| {
        let c = &pts.p[i * d..(i + 1) * d];
        (c, recip_gap(c, pts.g[i]))
    };
    for _ in 1..k {
        let (c, ac) = centre(last);
        let sums = lower_d2(soa, &mut d2, &mut hn, c, ac);
        let total: f64 = sums.iter().sum();
        let i = if total > 0.0 {
            let cand: Vec<usize> = (0..trials).map(|_| draw_d2(&d2, &sums, rng.uniform())).collect();
            if trials == 1 {
                cand[0]
            } else {
                let cs: Vec<(&[f64], f64)> = cand.iter().map(|&i| centre(i)).collect();
                let pot = potentials(soa, &d2, &hn, &cs);
                let mut b = 0;
                for t in 1..trials {
                    if pot[t] < pot[b] {
                        b = t;
                    }
                }
                cand[b]
            }
        } else {
            nth_free(&chosen, rng.below((n - chosen.len()) as u64) as usize)
        };
        chosen.push(i);
        last = i;
    }
    chosen
}

/// `k` distinct indices, uniformly (a partial Fisher-Yates shuffle).
fn distinct(n: usize, k: usize, rng: &mut Rng) -> Vec<usize> {
    let mut swapped: HashMap<usize, usize> = HashMap::new();
    let mut out = Vec::with_capacity(k);
    for i in 0..k {
        let j = i + rng.below((n - i) as u64) as usize;
        let vj = *swapped.get(&j).unwrap_or(&j);
        let vi = *swapped.get(&i).unwrap_or(&i);
        swapped.insert(j, vi);
        out.push(vj);
    }
    out
}

// ---------------------------------------------------------------- Lloyd

/// The points once more, for the Lloyd passes: coordinates transposed
/// (`x[t * n + i]`, so a block of consecutive points is a vector load per
/// coordinate), gaps and `1/g`; `n` padded to whole chunks by repeating the
/// last point (computed, never used).
struct Soa {
    n: usize,
    d: usize,
    x: Vec<f64>,
    g: Vec<f64>,
    ax: Vec<f64>,
}

impl Soa {
    fn new(pts: &UnitPoints) -> Soa {
        let (d, n) = (pts.d, pts.n.div_ceil(CHUNK) * CHUNK);
        let mut x = vec![0f64; d * n];
        let mut g = vec![0f64; n];
        let mut ax = vec![0f64; n];
        let p: &[f64] = &pts.p;
        // Chunk by chunk (rows read in order), each chunk's piece of every
        // column.
        let mut pieces: Vec<Vec<&mut [f64]>> = (0..n / CHUNK).map(|_| Vec::with_capacity(d)).collect();
        for col in x.chunks_mut(n) {
            for (ci, piece) in col.chunks_mut(CHUNK).enumerate() {
                pieces[ci].push(piece);
            }
        }
        pieces.into_par_iter().zip(g.par_chunks_mut(CHUNK)).zip(ax.par_chunks_mut(CHUNK)).enumerate().for_each(
            |(ci, ((mut cols, gc), ac))| {
                for r in 0..CHUNK {
                    let i = (ci * CHUNK + r).min(pts.n - 1);
                    for (t, col) in cols.iter_mut().enumerate() {
                        col[r] = p[i * d + t];
                    }
                    gc[r] = pts.g[i];
                    ac[r] = 1.0 / pts.g[i];
                }
            },
        );
        Soa { n, d, x, g, ax }
    }
}

/// Per-cluster sums of one pass, flat: for each cluster `[wsum, f, hscal,
/// grad (d), hout (d x d)]` (the fields of [`Stats`]).
struct Sums {
    d: usize,
    w: usize,
    v: Vec<f64>,
}

impl Sums {
    fn zero(k: usize, d: usize) -> Sums {
        let w = 3 + d + d * d;
        Sums { d, w, v: vec![0f64; k * w] }
    }

    /// Adds `o` (chunk sums are added in chunk order: deterministic).
    fn add(&mut self, o: &Sums) {
        self.v.iter_mut().zip(&o.v).for_each(|(a, b)| *a += b);
    }

    fn into_stats(self) -> Vec<Stats> {
        let d = self.d;
        self.v
            .chunks_exact(self.w)
            .map(|s| Stats { wsum: s[0], f: s[1], hscal: s[2], grad: s[3..3 + d].to_vec(), hout: s[3 + d..].to_vec() })
            .collect()
    }
}

/// Nearest centre of the points `off..off + B` of a chunk by `h` (ties to
/// the lower index): `cols` holds the chunk's piece of every coordinate
/// column, `ax` the points' `1/g`. Each pair's `|x - c|^2` is summed in
/// coordinate order and scaled as `pairwise::scaled_h` does, so the ranking
/// is that of `knn`; four centres at a time share the loads of the points'
/// coordinates (half a block at a time), and the centres are ranked in
/// index order.
#[inline(always)]
fn nearest(
    cols: &[&[f64; CHUNK]],
    ax: &[f64; B],
    off: usize,
    cen: &Centres,
    best: &mut [f64; B],
    lab: &mut [usize; B],
) {
    let d = cen.d;
    let k = cen.a.len();
    let mut bh = [f64::INFINITY; B];
    // the label as a float: one blend per register, as for `bh`
    let mut bl = [0f64; B];
    let mut j = 0;
    while j + 4 <= k {
        let (c0, rest) = cen.c[j * d..(j + 4) * d].split_at(d);
        let (c1, rest) = rest.split_at(d);
        let (c2, c3) = rest.split_at(d);
        let mut s0 = [0f64; B];
        let mut s1 = [0f64; B];
        let mut s2 = [0f64; B];
        let mut s3 = [0f64; B];
        // Half a block at a time: the four centres' sums of eight lanes and
        // the loads fit the sixteen AVX2 registers; all sixteen lanes spilled
        // sums to the stack (nearest alone, taxonomy, one thread: 1.12-1.17
        // -> 1.02-1.03 ms per pass).
        for o in [0, H] {
            let mut t0 = [0f64; H];
            let mut t1 = [0f64; H];
            let mut t2 = [0f64; H];
            let mut t3 = [0f64; H];
            for (((col, &a0), &a1), (&a2, &a3)) in cols.iter().zip(c0).zip(c1).zip(c2.iter().zip(c3)) {
                let xt: &[f64; H] = col[off + o..off + o + H].try_into().expect("H lanes");
                for l in 0..H {
                    let u0 = xt[l] - a0;
                    let u1 = xt[l] - a1;
                    let u2 = xt[l] - a2;
                    let u3 = xt[l] - a3;
                    t0[l] = u0.mul_add(u0, t0[l]);
                    t1[l] = u1.mul_add(u1, t1[l]);
                    t2[l] = u2.mul_add(u2, t2[l]);
                    t3[l] = u3.mul_add(u3, t3[l]);
                }
            }
            s0[o..o + H].copy_from_slice(&t0);
            s1[o..o + H].copy_from_slice(&t1);
            s2[o..o + H].copy_from_slice(&t2);
            s3[o..o + H].copy_from_slice(&t3);
        }
        rank(&s0, ax, cen.a[j], j, &mut bh, &mut bl);
        rank(&s1, ax, cen.a[j + 1], j + 1, &mut bh, &mut bl);
        rank(&s2, ax, cen.a[j + 2], j + 2, &mut bh, &mut bl);
        rank(&s3, ax, cen.a[j + 3], j + 3, &mut bh, &mut bl);
        j += 4;
    }
    for j in j..k {
        let mut s = [0f64; B];
        for (col, &c) in cols.iter().zip(&cen.c[j * d..(j + 1) * d]) {
            let xt: &[f64; B] = col[off..off + B].try_into().expect("B lanes");
            for l in 0..B {
                let u = xt[l] - c;
                s[l] = u.mul_add(u, s[l]);
            }
        }
        rank(&s, ax, cen.a[j], j, &mut bh, &mut bl);
    }
    *best = bh;
    for l in 0..B {
        lab[l] = bl[l] as usize;
    }
}

/// Ranks centre `j` (factor `aj`, squared distances `s`) against the best
/// so far, lane by lane (strictly better wins: ties stay with the lower
/// index).
#[inline(always)]
fn rank(s: &[f64; B], ax: &[f64; B], aj: f64, j: usize, bh: &mut [f64; B], bl: &mut [f64; B]) {
    let jf = j as f64;
    for l in 0..B {
        let h = scaled_h(s[l], ax[l], aj, 1.0);
        let m = h < bh[l];
        bh[l] = if m { h } else { bh[l] };
        bl[l] = if m { jf } else { bl[l] };
    }
}

/// Scratch of one chunk's statistics.
struct Scratch {
    /// Lane accumulators `[q * B + l]` of the weight, the two scalar sums
    /// and the gradient (`3 + d` rows).
    acc: Vec<f64>,
    /// The Hessian's upper triangle, `HL` lanes per entry `(r, s)`, `s >= r`,
    /// row by row.
    hacc: Vec<f64>,
    ys: Vec<f64>,
}

impl Scratch {
    fn new(d: usize) -> Scratch {
        Scratch { acc: vec![0f64; (3 + d) * B], hacc: vec![0f64; d * (d + 1) / 2 * HL], ys: vec![0f64; d * B] }
    }
}

/// Each chunk's member offsets grouped by cluster (a counting sort, input
/// order within a cluster) and each cluster's start in them: computed in the
/// assignment pass that sets the labels and reused by every further pass of
/// the update that follows (the labels do not change in between).
struct Groups {
    k: usize,
    /// `order[ci * CHUNK..]`: chunk `ci`'s offsets.
    order: Vec<u32>,
    /// `start[ci * (k + 1)..]`: chunk `ci`'s cluster starts.
    start: Vec<u32>,
}

impl Groups {
    fn new(n_padded: usize, k: usize) -> Groups {
        Groups { k, order: vec![0; n_padded], start: vec![0; n_padded / CHUNK * (k + 1)] }
    }

    /// Regroups every chunk from `labels` (after an empty-cluster repair).
    fn rebuild(&mut self, labels: &[usize]) {
        let k = self.k;
        labels
            .par_chunks(CHUNK)
            .zip(self.order.par_chunks_mut(CHUNK))
            .zip(self.start.par_chunks_mut(k + 1))
            .for_each(|((lab, order), start)| group(lab, order, start));
    }
}

/// Counting sort of one chunk's labels: `order` the offsets by cluster,
/// `start` (`k + 1` values) where each cluster's offsets begin.
#[inline(always)]
fn group(lab: &[usize], order: &mut [u32], start: &mut [u32]) {
    let k = start.len() - 1;
    start.iter_mut().for_each(|v| *v = 0);
    for &l in lab {
        start[l + 1] += 1;
    }
    for j in 0..k {
        start[j + 1] += start[j];
    }
    // `start[l]` as cluster l's cursor; afterwards it holds the cluster's
    // end, the next one's start: shifted back by one place
    for (r, &l) in lab.iter().enumerate() {
        order[start[l] as usize] = r as u32;
        start[l] += 1;
    }
    start.copy_within(0..k, 1);
    start[0] = 0;
}

/// Row `q` of a lane array: `B` values (one check, then none per lane).
#[inline(always)]
fn row(v: &[f64], q: usize) -> &[f64; B] {
    v[q * B..(q + 1) * B].try_into().expect("B lanes")
}

#[inline(always)]
fn row_mut(v: &mut [f64], q: usize) -> &mut [f64; B] {
    (&mut v[q * B..(q + 1) * B]).try_into().expect("B lanes")
}

/// Adds the points `i0 + r` of a chunk (`r` over `lab`) to the Newton
/// statistics of their clusters, each at its cluster's point (`mu`:
/// row-major unit-ball points, `gmu` their gaps), for the clusters flagged
/// in `need`. The terms are those of [`super::centroids::stats`] (the gradient
/// `sum d/t y`, the Hessian's parts `sum d coth d` and `sum (1 - d coth d)/t^2
/// y y^T` with `y = (-mu) ⊕ x`, `t = |y|`, `d = 2 artanh t`), computed over B
/// members of one cluster at a time and summed lane by lane (fixed order).
/// `du`: the unit distances if the caller has them (the assignment).
#[inline(always)]
fn chunk_stats(
    soa: &Soa,
    i0: usize,
    order: &[u32],
    start: &[u32],
    du: Option<&[f64; CHUNK]>,
    mu: &[f64],
    gmu: &[f64],
    need: &[bool],
    sums: &mut Sums,
    sc: &mut Scratch,
) {
    let (d, n, w) = (soa.d, soa.n, sums.w);
    let k = gmu.len();
    let g: &[f64; CHUNK] = soa.g[i0..i0 + CHUNK].try_into().expect("whole chunks");
    for j in 0..k {
        let members = &order[start[j] as usize..start[j + 1] as usize];
        if !need[j] || members.is_empty() {
            continue;
        }
        let mj = &mu[j * d..(j + 1) * d];
        let gm = gmu[j];
        sc.acc.iter_mut().for_each(|v| *v = 0.0);
        sc.hacc.iter_mut().for_each(|v| *v = 0.0);
        for blk in members.chunks(B) {
            let m = blk.len();
            let mut idx = [0usize; B];
            let mut live = [0f64; B];
            for l in 0..B {
                // `% CHUNK` is free (a power of two) and proves the index in
                // range: members are chunk offsets.
                idx[l] = blk[l.min(m - 1)] as usize % CHUNK;
                live[l] = if l < m { 1.0 } else { 0.0 };
            }
            let mut gp = [0f64; B];
            for l in 0..B {
                gp[l] = g[idx[l]];
            }
            // s = x - mu, |s|^2
            let mut ss = [0f64; B];
            for t in 0..d {
                let col: &[f64; CHUNK] = soa.x[t * n + i0..t * n + i0 + CHUNK].try_into().expect("whole chunks");
                let yt = row_mut(&mut sc.ys, t);
                let mt = mj[t];
                for l in 0..B {
                    let s = col[idx[l]] - mt;
                    yt[l] = s;
                    ss[l] = s.mul_add(s, ss[l]);
                }
            }
            // y = (-mu) ⊕ x = (g_mu s - |s|^2 mu) / D, D = g_mu g_x + |s|^2;
            // its gap g_mu g_x / D
            // one division for 1/D and the inverse gap D / (g_mu g_x)
            let mut a = [0f64; B];
            let mut b = [0f64; B];
            let mut igy = [0f64; B];
            for l in 0..B {
                let gg = gm * gp[l];
                let den = gg + ss[l];
                let inv = 1.0 / (gg * den);
                let r = gg * inv;
                a[l] = gm * r;
                b[l] = ss[l] * r;
                igy[l] = den * den * inv;
            }
            let mut t2 = [0f64; B];
            for t in 0..d {
                let yt = row_mut(&mut sc.ys, t);
                let mt = mj[t];
                for l in 0..B {
                    let y = a[l] * yt[l] - b[l] * mt;
                    yt[l] = y;
                    t2[l] = y.mul_add(y, t2[l]);
                }
            }
            let mut tt = [0f64; B];
            for l in 0..B {
                tt[l] = t2[l].sqrt();
            }
            // d = 2 artanh t = log1p(2t (1 + t) / g_y), unless given
            let mut dv = [0f64; B];
            match du {
                Some(u) => {
                    for l in 0..B {
                        dv[l] = u[idx[l]];
                    }
                }
                None => {
                    for l in 0..B {
                        dv[l] = log1p_fast(2.0 * tt[l] * (1.0 + tt[l]) * igy[l]);
                    }
                }
            }
            // d coth d with coth(2 artanh t) = (1 + t^2)/(2t) (one division
            // for 1/t; `(1 - c)` is 0 or at least 2^-53, so for t < 1e-8,
            // where 1/t^2 could overflow, the product is 0); a point on its
            // centre adds its weight to the scalar part only; padding lanes
            // add nothing.
            let mut c = [0f64; B];
            let mut fg = [0f64; B];
            let mut fh = [0f64; B];
            let mut f = [0f64; B];
            for l in 0..B {
                let zero = tt[l] == 0.0;
                let it = 1.0 / tt[l];
                let q = dv[l] * it;
                let cc = 0.5 * q * (1.0 + t2[l]);
                c[l] = live[l] * if zero { 1.0 } else { cc };
                fg[l] = if zero { 0.0 } else { live[l] * q };
                fh[l] = if zero { 0.0 } else { live[l] * (((1.0 - cc) * it) * it) };
                f[l] = if zero { 0.0 } else { live[l] * (dv[l] * dv[l]) };
            }
            for (q, v) in [live, f, c].iter().enumerate() {
                let r = row_mut(&mut sc.acc, q);
                for l in 0..B {
                    r[l] += v[l];
                }
            }
            for t in 0..d {
                let yt = *row(&sc.ys, t);
                let r = row_mut(&mut sc.acc, 3 + t);
                for l in 0..B {
                    r[l] = fg[l].mul_add(yt[l], r[l]);
                }
            }
            add_hessian_block(&fh, &sc.ys, d, &mut sc.hacc);
        }
        // lanes summed in order; the lower triangle mirrors the upper
        let out = &mut sums.v[j * w..(j + 1) * w];
        for q in 0..3 + d {
            out[q] += row(&sc.acc, q).iter().fold(0.0, |x, y| x + y);
        }
        add_hessian_sums(&sc.hacc, d, &mut out[3 + d..]);
    }
}

/// A point that changed clusters: `(index, old cluster, new cluster)`.
type Move = (usize, usize, usize);

/// What an assignment pass found besides the labels and distances.
struct Assigned {
    /// The inertia (fixed-chunk sums in order).
    inertia: f64,
    /// With `gather` flagging some cluster: the Newton statistics at its
    /// centre of every flagged cluster (zero for the others).
    stats: Option<Vec<Stats>>,
    /// With `prev`: the clusters that gained or lost a point against `prev`,
    /// and the points that moved, `(index, old cluster, new cluster)` in
    /// input order.
    changed: Vec<bool>,
    moves: Vec<Move>,
    /// With `gather`: each cluster's number of points.
    counts: Vec<usize>,
}

/// Nearest centre (ties to the lower index) and its distance, per point.
/// With `gather`, groups the chunks' members by their new labels into
/// `groups` (for the update's passes) and sums the Newton statistics of the
/// flagged clusters at their centres (the first pass of the next update,
/// done while the chunk is in cache). With `prev` (the labels the centres
/// were computed from), flags the clusters whose members changed.
fn assign(
    soa: &Soa,
    cen: &Centres,
    k: &Curvature,
    labels: &mut [usize],
    prev: Option<&[usize]>,
    dist: &mut [f64],
    groups: &mut Groups,
    gather: Option<&[bool]>,
) -> Assigned {
    let nc = cen.a.len();
    let d = soa.d;
    let ns = if gather.is_some_and(|need| need.iter().any(|&b| b)) { nc } else { 0 };
    let parts: Vec<(f64, Sums, Vec<Move>)> = labels
        .par_chunks_mut(CHUNK)
        .zip(dist.par_chunks_mut(CHUNK))
        .zip(groups.order.par_chunks_mut(CHUNK))
        .zip(groups.start.par_chunks_mut(nc + 1))
        .enumerate()
        .map_init(
            || Scratch::new(d),
            |sc, (ci, (((lc, dc), oc), stc))| {
                dispatch(
                    has_fma(),
                    #[inline(always)]
                    || {
                        let i0 = ci * CHUNK;
                        let mut sums = Sums::zero(ns, d);
                        let mut du = [0f64; CHUNK];
                        let mut lab = [0usize; CHUNK];
                        let len = lc.len();
                        let n = soa.n;
                        let cols: Vec<&[f64; CHUNK]> = (0..d)
                            .map(|t| soa.x[t * n + i0..t * n + i0 + CHUNK].try_into().expect("whole chunks"))
                            .collect();
                        for bi in 0..CHUNK / B {
                            let mut best = [0f64; B];
                            let mut lb = [0usize; B];
                            nearest(&cols, row(&soa.ax[i0..], bi), bi * B, cen, &mut best, &mut lb);
                            for l in 0..B {
                                du[bi * B + l] = acosh1p2_fast(best[l]);
                                lab[bi * B + l] = lb[l];
                            }
                        }
                        let mut moves = Vec::new();
                        if let Some(pv) = prev {
                            for (r, (&a, &b)) in pv[i0..i0 + len].iter().zip(&lab[..len]).enumerate() {
                                if a != b {
                                    moves.push((i0 + r, a, b));
                                }
                            }
                        }
                        lc.copy_from_slice(&lab[..len]);
                        for (o, &u) in dc.iter_mut().zip(&du[..len]) {
                            *o = k.radius * u;
                        }
                        // squares summed in B running lanes (not one chain of
                        // dependent additions), the lanes added in order
                        let mut sl = [0f64; B];
                        let mut blocks = dc.chunks_exact(B);
                        for blk in &mut blocks {
                            let blk: &[f64; B] = blk.try_into().expect("B lanes");
                            for l in 0..B {
                                sl[l] = blk[l].mul_add(blk[l], sl[l]);
                            }
                        }
                        for (a, &v) in sl.iter_mut().zip(blocks.remainder()) {
                            *a = v.mul_add(v, *a);
                        }
                        let s = sl.iter().fold(0.0, |x, y| x + y);
                        if let Some(need) = gather {
                            group(&lab[..len], oc, stc);
                            if ns > 0 {
                                chunk_stats(soa, i0, oc, stc, Some(&du), &cen.c, &cen.g, need, &mut sums, sc);
                            }
                        }
                        (s, sums, moves)
                    },
                )
            },
        )
        .collect();
    let mut inertia = 0.0;
    let mut tot = Sums::zero(ns, d);
    let mut changed = vec![false; nc];
    let mut moves = Vec::new();
    for (s, sums, mv) in &parts {
        inertia += s;
        tot.add(sums);
        for &(i, a, b) in mv {
            changed[a] = true;
            changed[b] = true;
            moves.push((i, a, b));
        }
    }
    let mut counts = Vec::new();
    let mut stats = None;
    if gather.is_some() {
        counts = vec![0usize; nc];
        for st in groups.start.chunks_exact(nc + 1) {
            for j in 0..nc {
                counts[j] += (st[j + 1] - st[j]) as usize;
            }
        }
        stats = (ns > 0).then(|| tot.into_stats());
    }
    Assigned { inertia, stats, changed, moves, counts }
}

/// The empty-cluster repair, in place (see the module docs).
fn repair(pts: &UnitPoints, labels: &mut [usize], dist: &mut [f64], cen: &mut Centres) -> bool {
    let k = cen.a.len();
    let d = pts.d;
    let mut counts = vec![0usize; k];
    labels.iter().for_each(|&l| counts[l] += 1);
    let empty: Vec<usize> = (0..k).filter(|&j| counts[j] == 0).collect();
    let moved = !empty.is_empty();
    for j in empty {
        let mut best = f64::NEG_INFINITY;
        let mut bi = usize::MAX;
        for (i, (&l, &dv)) in labels.iter().zip(dist.iter()).enumerate() {
            if counts[l] >= 2 && dv > best {
                best = dv;
                bi = i;
            }
        }
        if bi == usize::MAX {
            continue; // no cluster has two points (cannot happen for k <= n)
        }
        counts[labels[bi]] -= 1;
        counts[j] += 1;
        labels[bi] = j;
        dist[bi] = 0.0;
        cen.set(j, &pts.p[bi * d..(bi + 1) * d], pts.g[bi]);
    }
    moved
}

/// The point indices of each cluster, in input order.
fn members(labels: &[usize], k: usize) -> Vec<Vec<usize>> {
    let mut counts = vec![0usize; k];
    labels.iter().for_each(|&l| counts[l] += 1);
    let mut m: Vec<Vec<usize>> = counts.iter().map(|&c| Vec::with_capacity(c)).collect();
    for (i, &l) in labels.iter().enumerate() {
        m[l].push(i);
    }
    m
}

/// Newton statistics of every cluster flagged in `need`, each at its own
/// iterate, in one pass over the points (fixed chunks summed in order).
fn multi_stats(soa: &Soa, groups: &Groups, it: &[Newton], need: &[bool]) -> Vec<Stats> {
    let (k, d) = (it.len(), soa.d);
    // The iterates in one array (finished ones as the origin: never summed).
    let mut mu = vec![0f64; k * d];
    let mut gmu = vec![1f64; k];
    for (j, n) in it.iter().enumerate() {
        if need[j] {
            mu[j * d..(j + 1) * d].copy_from_slice(&n.mu);
            gmu[j] = n.gmu;
        }
    }
    let parts: Vec<Sums> = groups
        .order
        .par_chunks(CHUNK)
        .zip(groups.start.par_chunks(k + 1))
        .enumerate()
        .map_init(
            || Scratch::new(d),
            |sc, (ci, (oc, stc))| {
                dispatch(
                    has_fma(),
                    #[inline(always)]
                    || {
                        let mut sums = Sums::zero(k, d);
                        chunk_stats(soa, ci * CHUNK, oc, stc, None, &mu, &gmu, need, &mut sums, sc);
                        sums
                    },
                )
            },
        )
        .collect();
    let mut tot = Sums::zero(k, d);
    for p in &parts {
        tot.add(p);
    }
    tot.into_stats()
}

/// What a centre's last update leaves for the next one: the Newton
/// statistics of its points at the last point where they were summed (the
/// Hessian, close to the one at the centre; the gradient there is not used),
/// and `drift`, the hyperbolic length (unit ball) of the unverified steps
/// taken since then.
#[derive(Clone)]
struct Kept {
    st: Stats,
    drift: f64,
}

/// The update step: the Fréchet mean of every cluster flagged in `changed`
/// (`None` for the others: same points, same mean) by Newton's method
/// started at its centre, all clusters advancing together so that each
/// further round of statistics is one sequential pass over the points.
///
/// The first round of a cluster with `kept` statistics costs no pass: its
/// centre is the mean of its previous points (to ~1e-10 R), where their
/// gradient vanishes, so the gradient of its new points there is that of the
/// points that came in minus that of those that left (`moves`), and the
/// Hessian is the kept one plus and minus theirs. A step from there ends the
/// update unverified only while the drift stays within
/// `INTERMEDIATE_LAST_STEP` (the Hessian is then that of a point at most
/// that far away: the step is off by that fraction of its length at most).
/// Otherwise `first` (the statistics at the centres gathered by the
/// assignment pass, valid for the clusters flagged in `gathered`) or the
/// first further pass starts it.
#[allow(clippy::too_many_arguments)]
fn update(
    pts: &UnitPoints,
    soa: &Soa,
    groups: &Groups,
    cen: &Centres,
    first: Option<Vec<Stats>>,
    gathered: &[bool],
    changed: &[bool],
    moves: &[Move],
    kept: &mut [Option<Kept>],
) -> Vec<Option<(Vec<f64>, f64)>> {
    let (k, d) = (cen.a.len(), cen.d);
    let mut it: Vec<Newton> = (0..k).map(|j| centre_newton(cen.row(j).to_vec(), cen.g[j])).collect();
    let mut need = changed.to_vec();
    let mut st: Vec<Stats> = first.unwrap_or_else(|| vec![Stats::zero(d); k]);
    // `have[j]`: `st[j]` holds the statistics at `it[j].mu`
    let mut have: Vec<bool> = (0..k).map(|j| gathered[j] && st[j].wsum > 0.0).collect();
    // the drift of each cluster's statistics in `st` from `it[j].mu`
    let mut drift = vec![0f64; k];
    let incremental: Vec<bool> = (0..k).map(|j| changed[j] && kept[j].is_some()).collect();
    if incremental.iter().any(|&b| b) {
        let mut inn: Vec<Vec<usize>> = vec![Vec::new(); k];
        let mut out: Vec<Vec<usize>> = vec![Vec::new(); k];
        for &(i, a, b) in moves {
            out[a].push(i);
            inn[b].push(i);
        }
        for j in (0..k).filter(|&j| incremental[j]) {
            let kp = kept[j].as_ref().expect("kept statistics");
            let (mu, g) = (cen.row(j), cen.g[j]);
            let add = stats(pts, &inn[j], None, mu, g);
            let sub = stats(pts, &out[j], None, mu, g);
            let mut s = kp.st.clone();
            s.grad.iter_mut().zip(add.grad.iter().zip(&sub.grad)).for_each(|(v, (a, b))| *v = a - b);
            s.hout.iter_mut().zip(add.hout.iter().zip(&sub.hout)).for_each(|(v, (a, b))| *v += a - b);
            s.hscal += add.hscal - sub.hscal;
            s.f += add.f - sub.f;
            s.wsum += add.wsum - sub.wsum;
            it[j].last_step = (INTERMEDIATE_LAST_STEP - kp.drift).max(0.0);
            drift[j] = kp.drift;
            st[j] = s;
            have[j] = true;
        }
    }
    // the point each cluster's statistics in `st` were summed at
    let mut at: Vec<Vec<f64>> = it.iter().map(|n| n.mu.clone()).collect();
    let mut at_g: Vec<f64> = it.iter().map(|n| n.gmu).collect();
    loop {
        let mut more = false;
        for j in 0..k {
            if need[j] && have[j] {
                at[j].clone_from(&it[j].mu);
                at_g[j] = it[j].gmu;
                // A cluster without points (only if the repair could not
                // fill it) keeps its centre.
                need[j] = st[j].wsum > 0.0 && it[j].advance(&st[j]);
                it[j].last_step = INTERMEDIATE_LAST_STEP;
                if need[j] {
                    drift[j] = 0.0;
                }
            }
            more |= need[j];
        }
        if !more {
            break;
        }
        let fresh = multi_stats(soa, groups, &it, &need);
        for j in 0..k {
            if need[j] {
                st[j] = fresh[j].clone();
                have[j] = true;
            }
        }
    }
    let mut res = Vec::with_capacity(k);
    for (j, n) in it.into_iter().enumerate() {
        if !changed[j] {
            res.push(None);
            continue;
        }
        match n.result {
            Some(r) if r.converged && st[j].wsum > 0.0 => {
                let step = unit_distance(&at[j], at_g[j], &r.mu, r.gap);
                kept[j] = Some(Kept { st: st[j].clone(), drift: drift[j] + step });
                res.push(Some((r.mu, r.gap)));
            }
            Some(r) => {
                kept[j] = None;
                res.push(Some((r.mu, r.gap)));
            }
            None => {
                kept[j] = None;
                res.push(None);
            }
        }
    }
    res
}

struct Run {
    cen: Centres,
    labels: Vec<usize>,
    inertia: f64,
    n_iter: usize,
    history: Vec<f64>,
}

/// The data's spread in the unit ball: the mean squared distance of the
/// points to their Einstein midpoint, divided by the dimension.
fn spread(pts: &UnitPoints) -> f64 {
    let idx: Vec<usize> = (0..pts.n).collect();
    match super::partial::run(pts, &idx, None, None) {
        Some(m) => super::centroids::stats(pts, &idx, None, &m.mu, m.gap).f / pts.n as f64 / pts.d as f64,
        None => 0.0,
    }
}

/// `threshold`: the stop rule's bound on `sum_j d(c_j, c_j')^2` (unit ball).
fn lloyd(pts: &UnitPoints, soa: &Soa, mut cen: Centres, p: &Params, threshold: f64, k: &Curvature) -> Run {
    let nc = cen.a.len();
    let mut labels = vec![0usize; pts.n];
    let mut dist = vec![0f64; pts.n];
    let mut new_labels = vec![0usize; pts.n];
    let mut labels_used = vec![0usize; pts.n];
    let mut groups = Groups::new(soa.n, nc);
    let all = vec![true; nc];
    let mut a = assign(soa, &cen, k, &mut labels, None, &mut dist, &mut groups, Some(&all));
    let mut history = vec![a.inertia];
    let mut n_iter = 0;
    // The clusters whose points changed (all, for the first update), and
    // those whose statistics the last assignment pass gathered: the ones
    // that changed the time before (clusters that settle tend to stay).
    let mut changed = all.clone();
    let mut gathered = all.clone();
    let mut kept: Vec<Option<Kept>> = vec![None; nc];
    for _ in 0..p.max_iter {
        if a.counts.contains(&0) && repair(pts, &mut labels, &mut dist, &mut cen) {
            // clusters and centres changed: every centre from scratch
            a.stats = None;
            changed.copy_from_slice(&all);
            kept.iter_mut().for_each(|v| *v = None);
            groups.rebuild(&labels);
        }
        let means = update(pts, soa, &groups, &cen, a.stats.take(), &gathered, &changed, &a.moves, &mut kept);
        let mut shift = 0.0;
        for (j, m) in means.iter().enumerate() {
            if let Some((mu, g)) = m {
                let dj = unit_distance(cen.row(j), cen.g[j], mu, *g);
                shift += dj * dj;
                cen.set(j, mu, *g);
            }
        }
        n_iter += 1;
        // the statistics at their centres of the clusters that changed the
        // time before (clusters that settle tend to stay), unless kept ones
        // start their update
        for j in 0..nc {
            gathered[j] = changed[j] && kept[j].is_none();
        }
        a = assign(soa, &cen, k, &mut new_labels, Some(&labels), &mut dist, &mut groups, Some(&gathered));
        history.push(a.inertia);
        changed.copy_from_slice(&a.changed);
        let unchanged = !changed.iter().any(|&c| c);
        std::mem::swap(&mut labels, &mut new_labels);
        // `new_labels` now holds the clusters this update was computed from.
        std::mem::swap(&mut labels_used, &mut new_labels);
        if unchanged || shift <= threshold {
            break;
        }
    }
    // The final centres: the Fréchet means of the last update's clusters
    // started at their Einstein midpoints, exactly as `frechet_mean` with
    // those labels computes them (the warm starts only save iterations).
    // So a centre depends on its members alone, and runs that end with the
    // same clusters (labels permuted) report the same inertia.
    let clusters = members(&labels_used, nc);
    let means: Vec<Option<(Vec<f64>, f64)>> = clusters
        .par_iter()
        .map(|idx| {
            if idx.is_empty() {
                return None;
            }
            frechet_group(pts, idx, None, CENTRE_TOL, CENTRE_MAX_ITER).map(|r| (r.mu, r.gap))
        })
        .collect();
    for (j, m) in means.into_iter().enumerate() {
        if let Some((mu, g)) = m {
            cen.set(j, &mu, g);
        }
    }
    let inertia = assign(soa, &cen, k, &mut labels, None, &mut dist, &mut groups, None).inertia;
    *history.last_mut().expect("one assignment") = inertia;
    Run { cen, labels, inertia, n_iter, history }
}

fn check_params(p: &Params, n: usize) -> Result<()> {
    if p.n_clusters == 0 {
        return Err(Error::Value("n_clusters must be >= 1, got 0".into()));
    }
    if p.n_clusters > n {
        return Err(Error::Value(format!("n_clusters={} is larger than the number of points ({n})", p.n_clusters)));
    }
    if p.max_iter == 0 {
        return Err(Error::Value("max_iter must be >= 1, got 0".into()));
    }
    if p.tol.is_nan() || p.tol < 0.0 {
        return Err(Error::Value(format!("tol must be >= 0, got {}", p.tol)));
    }
    Ok(())
}

/// k-means++ seeding alone: the indices of the chosen points of `x`.
pub fn plusplus_indices(
    model: Model,
    k: Curvature,
    x: &Data,
    n_clusters: usize,
    trials: usize,
    seed: u64,
) -> Result<Vec<usize>> {
    let pts = unit_points(model, &k, "x", x).map_err(|e| bad_points(model, "X", e))?;
    check_params(&Params { n_clusters, max_iter: 1, tol: 0.0 }, pts.n)?;
    Ok(plusplus(&pts, &Soa::new(&pts), n_clusters, trials, &mut Rng::new(seed)))
}

/// Fits k-means: one run per seed (one run for given centres), the run of
/// lowest inertia kept.
pub fn fit(model: Model, k: Curvature, x: &Data, init: Init, seeds: &[u64], p: &Params) -> Result<Fit> {
    let pts = unit_points(model, &k, "x", x).map_err(|e| bad_points(model, "X", e))?;
    check_params(p, pts.n)?;
    let (d, width) = (pts.d, model.width(pts.d));
    let given = match &init {
        Init::Given(c) => {
            let cp = unit_points(model, &k, "x", c).map_err(|e| bad_points(model, "init", e))?;
            if cp.n != p.n_clusters || cp.d != d {
                return Err(Error::Value(format!(
                    "init must have shape (n_clusters, width) = ({}, {width}); got ({}, {})",
                    p.n_clusters,
                    cp.n,
                    model.width(cp.d)
                )));
            }
            let mut cen = Centres::new(d);
            for j in 0..cp.n {
                cen.push(&cp.p[j * d..(j + 1) * d], cp.g[j]);
            }
            Some(cen)
        }
        _ => None,
    };
    if given.is_none() && seeds.is_empty() {
        return Err(Error::Value("n_init must be >= 1 (no seeds given)".into()));
    }
    let runs = if given.is_some() { 1 } else { seeds.len() };
    let threshold = if p.tol > 0.0 { p.tol * spread(&pts) } else { 0.0 };
    let soa = Soa::new(&pts);
    let mut best: Option<Run> = None;
    for r in 0..runs {
        let cen = match &given {
            Some(c) => c.clone(),
            None => {
                let mut rng = Rng::new(seeds[r]);
                let idx = match &init {
                    Init::PlusPlus(trials) => plusplus(&pts, &soa, p.n_clusters, *trials, &mut rng),
                    _ => distinct(pts.n, p.n_clusters, &mut rng),
                };
                let mut cen = Centres::new(d);
                for &i in &idx {
                    cen.push(&pts.p[i * d..(i + 1) * d], pts.g[i]);
                }
                cen
            }
        };
        let run = lloyd(&pts, &soa, cen, p, threshold, &k);
        if best.as_ref().map_or(true, |b| run.inertia < b.inertia) {
            best = Some(run);
        }
    }
    let best = best.expect("at least one run");
    let mut centers = vec![0f64; p.n_clusters * width];
    for j in 0..p.n_clusters {
        to_model(model, &k, best.cen.row(j), best.cen.g[j], &mut centers[j * width..(j + 1) * width]);
    }
    Ok(Fit {
        width,
        centers,
        labels: best.labels.iter().map(|&l| l as i64).collect(),
        inertia: best.inertia,
        n_iter: best.n_iter,
        history: best.history,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    /// `n` points of `stats::test_ball` (`d`, radius `r`, `seed`), in the
    /// unit ball with their gaps.
    fn ball_points(n: usize, d: usize, r: f64, seed: u64) -> UnitPoints<'static> {
        let x = crate::stats::test_ball(n, d, r, seed);
        let a = ndarray::ArrayView2::from_shape((n, d), &x[..]).unwrap().into_dyn();
        let data = Data::F64(a);
        let u = unit_points(Model::Poincare, &Curvature::default(), "x", &data).unwrap();
        UnitPoints { n: u.n, d: u.d, p: std::borrow::Cow::Owned(u.p.into_owned()), g: u.g }
    }

    #[test]
    fn below_is_in_range_and_roughly_uniform() {
        let mut r = Rng::new(7);
        let mut counts = [0usize; 5];
        for _ in 0..50_000 {
            counts[r.below(5) as usize] += 1;
        }
        // common practice: binomial counts within 5 standard deviations
        for c in counts {
            assert!((c as f64 - 10_000.0).abs() < 5.0 * (50_000.0f64 * 0.2 * 0.8).sqrt(), "{counts:?}");
        }
        let u: Vec<f64> = (0..1000).map(|_| r.uniform()).collect();
        assert!(u.iter().all(|&v| (0.0..1.0).contains(&v)));
    }

    #[test]
    fn distinct_and_nth_free() {
        let mut r = Rng::new(3);
        for _ in 0..100 {
            let mut v = distinct(10, 10, &mut r);
            v.sort_unstable();
            assert_eq!(v, (0..10).collect::<Vec<_>>());
        }
        assert_eq!(nth_free(&[0, 2, 3], 0), 1);
        assert_eq!(nth_free(&[0, 2, 3], 1), 4);
        assert_eq!(nth_free(&[5], 5), 6);
    }

    #[test]
    fn lower_d2_in_lanes_matches_the_point_by_point_formula() {
        // Regression against the scalar formula (h_point, acosh1p2_fast,
        // running sums in input order) that the seeding used before its
        // lanes: the same bits, so the same draws, also where whole blocks
        // skip the distances (`SKIP_MARGIN`: most blocks after the first few
        // centres; a centre repeated skips every block). n is neither a
        // multiple of the lane count nor of a seed chunk.
        for (n, d) in [(9001, 3), (37, 10), (4096 + 17, 2)] {
            let pts = ball_points(n, d, 6.0, n as u64);
            let soa = Soa::new(&pts);
            let mut d2 = vec![f64::INFINITY; n];
            let mut hn = vec![f64::INFINITY; n];
            let mut want = vec![f64::INFINITY; n];
            for c in [0, n / 2, n - 1, n / 3, n / 2, 1, n / 5, n - 2, n / 7, 2] {
                let cp = &pts.p[c * d..(c + 1) * d];
                let ac = recip_gap(cp, pts.g[c]);
                let sums = lower_d2(&soa, &mut d2, &mut hn, cp, ac);
                let mut want_sums = Vec::new();
                for ch in 0..n.div_ceil(SEED_CHUNK) {
                    let mut s = 0.0;
                    for i in ch * SEED_CHUNK..((ch + 1) * SEED_CHUNK).min(n) {
                        let t = acosh1p2_fast(h_point(&pts, i, cp, ac));
                        want[i] = want[i].min(t * t);
                        s += want[i];
                    }
                    want_sums.push(s);
                }
                assert!(d2.iter().zip(&want).all(|(a, b)| a.to_bits() == b.to_bits()), "n {n}, d {d}");
                assert_eq!(sums, want_sums);
            }
        }
    }

    #[test]
    fn greedy_seeding_keeps_the_candidate_of_least_potential() {
        // The seeding replayed with the scalar formula (h_point per pair,
        // point-by-point sums in fixed chunks): the same generator draws the
        // same candidates, and each step keeps the one whose potential
        // sum_i min(d2_i, d(x_i, c)^2) is smallest (common practice, as in
        // scikit-learn's greedy k-means++). One trial is plain k-means++.
        let (n, d) = (5000, 3);
        let pts = ball_points(n, d, 6.0, 11);
        let soa = Soa::new(&pts);
        let t2 = |i: usize, c: usize| {
            let cp = &pts.p[c * d..(c + 1) * d];
            let t = acosh1p2_fast(h_point(&pts, i, cp, recip_gap(cp, pts.g[c])));
            t * t
        };
        for (k, trials, seed) in [(8, 4, 5u64), (12, 1, 6), (5, 3, 7)] {
            let got = plusplus(&pts, &soa, k, trials, &mut Rng::new(seed));
            let mut rng = Rng::new(seed);
            let mut want = vec![rng.below(n as u64) as usize];
            let mut d2 = vec![f64::INFINITY; n];
            let sums_of =
                |v: &[f64]| -> Vec<f64> { v.chunks(SEED_CHUNK).map(|ch| ch.iter().fold(0.0, |a, b| a + b)).collect() };
            for _ in 1..k {
                let last = *want.last().unwrap();
                (0..n).for_each(|i| d2[i] = d2[i].min(t2(i, last)));
                let sums = sums_of(&d2);
                let cand: Vec<usize> = (0..trials).map(|_| draw_d2(&d2, &sums, rng.uniform())).collect();
                let pot: Vec<f64> = cand
                    .iter()
                    .map(|&c| sums_of(&(0..n).map(|i| d2[i].min(t2(i, c))).collect::<Vec<_>>()).iter().sum())
                    .collect();
                let b = (0..trials).fold(0, |b, t| if pot[t] < pot[b] { t } else { b });
                want.push(cand[b]);
            }
            assert_eq!(got, want, "k {k}, trials {trials}");
            let mut u = got.clone();
            u.sort_unstable();
            u.dedup();
            assert_eq!(u.len(), k, "distinct centres");
        }
        assert_eq!((greedy_trials(1), greedy_trials(10), greedy_trials(100)), (2, 4, 6));
    }

    #[test]
    fn assignment_matches_the_point_by_point_ranking() {
        // Regression against the scalar ranking (h_point per pair, centres
        // in index order, strictly smaller wins): the same labels and the
        // same distances bit for bit, for every count of centres (the
        // assignment ranks them four at a time, the rest one by one), including
        // ties (a centre repeated) and n not a multiple of a chunk.
        for (n, d) in [(2048 + 37, 1), (3001, 2), (500, 5), (777, 10)] {
            let pts = ball_points(n, d, 6.0, (n * d) as u64);
            let soa = Soa::new(&pts);
            let k = Curvature::default();
            for nc in 1..=11 {
                let mut cen = Centres::new(d);
                for j in 0..nc {
                    // centre 3 repeats centre 0: their points stay with 0
                    let i = if j == 3 { 7 } else { (j * 131 + 7) % n };
                    cen.push(&pts.p[i * d..(i + 1) * d], pts.g[i]);
                }
                let mut labels = vec![0usize; n];
                let mut dist = vec![0f64; n];
                let mut groups = Groups::new(soa.n, nc);
                assign(&soa, &cen, &k, &mut labels, None, &mut dist, &mut groups, None);
                for i in 0..n {
                    let (mut bh, mut bl) = (f64::INFINITY, 0);
                    for j in 0..nc {
                        let h = h_point(&pts, i, cen.row(j), cen.a[j]);
                        if h < bh {
                            (bh, bl) = (h, j);
                        }
                    }
                    assert_eq!(labels[i], bl, "n {n}, d {d}, {nc} centres, point {i}");
                    assert_eq!(dist[i].to_bits(), acosh1p2_fast(bh).to_bits(), "n {n}, d {d}, {nc} centres, point {i}");
                }
            }
        }
    }

    #[test]
    fn an_update_from_kept_statistics_reaches_the_mean_of_the_new_points() {
        // The centre of a cluster after a few of its points moved, updated
        // from the kept Hessian and the moved points' statistics, against
        // the Fréchet mean of the new points computed from scratch
        // (frechet_group, gradient tolerance 1e-12): within the ~1e-10 R the
        // intermediate centres promise (common practice: agreement of two
        // routes to one minimiser).
        let (n, d) = (5000, 4);
        let pts = ball_points(n, d, 3.0, 21);
        let soa = Soa::new(&pts);
        // two clusters by the sign of the first coordinate
        let labels: Vec<usize> = (0..n).map(|i| usize::from(pts.p[i * d] > 0.0)).collect();
        let mut groups = Groups::new(soa.n, 2);
        groups.rebuild(&labels);
        let mut cen = Centres::new(d);
        for j in 0..2 {
            let i = labels.iter().position(|&l| l == j).unwrap();
            cen.push(&pts.p[i * d..(i + 1) * d], pts.g[i]);
        }
        let mut kept: Vec<Option<Kept>> = vec![None, None];
        let all = [true, true];
        let no = [false, false];
        // Lloyd updates on fixed labels until the centres settle, keeping
        // the statistics
        for _ in 0..6 {
            for (j, m) in update(&pts, &soa, &groups, &cen, None, &no, &all, &[], &mut kept).into_iter().enumerate() {
                let (mu, g) = m.unwrap();
                cen.set(j, &mu, g);
            }
            kept.iter_mut().for_each(|k| *k = k.take().map(|k| Kept { drift: 0.0, ..k }));
        }
        assert!(kept.iter().all(|k| k.is_some()));
        // the point of cluster 0 nearest its centre: moving it shifts that
        // centre by less than INTERMEDIATE_LAST_STEP (an update without a
        // pass over the points)
        let near = (0..n)
            .filter(|&i| labels[i] == 0)
            .min_by(|&p, &q| {
                let dp = unit_distance(&pts.p[p * d..(p + 1) * d], pts.g[p], cen.row(0), cen.g[0]);
                let dq = unit_distance(&pts.p[q * d..(q + 1) * d], pts.g[q], cen.row(0), cen.g[0]);
                dp.total_cmp(&dq)
            })
            .unwrap();
        for moved in [0usize, 1, 7, 60] {
            let mut ks = kept.clone();
            let mut lab2 = labels.clone();
            let mut moves = Vec::new();
            let chosen: Vec<usize> =
                if moved == 0 { vec![near] } else { (0..n).filter(|&i| labels[i] == 0).take(moved).collect() };
            for i in chosen {
                lab2[i] = 1;
                moves.push((i, 0, 1));
            }
            let mut g2 = Groups::new(soa.n, 2);
            g2.rebuild(&lab2);
            let got = update(&pts, &soa, &g2, &cen, None, &no, &all, &moves, &mut ks);
            for (j, m) in got.iter().enumerate() {
                let (mu, g) = m.as_ref().unwrap();
                let idx: Vec<usize> = (0..n).filter(|&i| lab2[i] == j).collect();
                let want = frechet_group(&pts, &idx, None, CENTRE_TOL, CENTRE_MAX_ITER).unwrap();
                let err = unit_distance(mu, *g, &want.mu, want.gap);
                assert!(err < 1e-10, "moved {moved}, cluster {j}: {err:e}");
            }
        }
    }

    #[test]
    fn group_is_a_stable_counting_sort() {
        // reference: a stable sort of the offsets by label (common practice)
        let mut r = Rng::new(11);
        for k in [1usize, 3, 64, 65, 100] {
            let lab: Vec<usize> = (0..1000).map(|_| r.below(k as u64) as usize).collect();
            let mut order = vec![0u32; CHUNK];
            let mut start = vec![0u32; k + 1];
            group(&lab, &mut order, &mut start);
            let mut want: Vec<u32> = (0..lab.len() as u32).collect();
            want.sort_by_key(|&i| lab[i as usize]);
            assert_eq!(&order[..lab.len()], &want[..], "k = {k}");
            for j in 0..k {
                let n = lab.iter().filter(|&&l| l == j).count() as u32;
                assert_eq!(start[j + 1] - start[j], n, "k = {k}, cluster {j}");
            }
            assert_eq!(start[k] as usize, lab.len());
        }
    }

    #[test]
    fn draw_d2_picks_by_running_sum() {
        let d2 = vec![0.0, 1.0, 0.0, 3.0];
        let sums = vec![4.0];
        assert_eq!(draw_d2(&d2, &sums, 0.0), 1);
        assert_eq!(draw_d2(&d2, &sums, 0.2499), 1);
        assert_eq!(draw_d2(&d2, &sums, 0.25), 3);
        assert_eq!(draw_d2(&d2, &sums, 0.999), 3);
    }
}
