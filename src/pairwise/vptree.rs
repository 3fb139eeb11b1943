//! Exact neighbour index for any of the four models: a vantage-point tree.
//!
//! The method is the vp-tree of P. N. Yianilos, "Data structures and
//! algorithms for nearest neighbor search in general metric spaces" (SODA
//! 1993), the same structure as J. K. Uhlmann's "metric trees" ("Satisfying
//! general proximity/similarity queries with metric trees", Information
//! Processing Letters 40, 1991). It needs nothing but a metric, so it works
//! unchanged in every model: each inner node holds a vantage point `v` and
//! splits its other points at the median of `d(v, .)`; a query `q` skips a
//! child whose points all lie at distances in `[lo, hi]` from `v` when
//! `max(d(q,v) - hi, lo - d(q,v))` (a lower bound on `d(q, p)` by the
//! triangle inequality) exceeds the current k-th distance.
//!
//! Why a metric tree and not a k-d tree on model coordinates: points spread
//! evenly in hyperbolic distance crowd against the sphere in the ball
//! models (and spread over many decades in the half-space), so boxes cut in
//! coordinates are wildly unequal in hyperbolic size. Median splits of the
//! hyperbolic distance itself keep every node balanced in point count and
//! keep the pruning bounds in the geometry the query is asked in.
//!
//! Exactness: every distance the tree reports is [`Prepared::distance`] of
//! the query row and the data row (the query as `self`), the value a brute
//! force over all pairs computes, and results are ordered by
//! `(distance, index)`, a total order, so the k nearest are one well-defined
//! set whatever order the tree visits points in. Pruning compares computed
//! distances, which carry a few ulps of relative error; every bound is
//! therefore loosened by [`SLACK`] (relative), a thousand times the error,
//! so rounding can never prune a point that brute force would report, ties
//! included. The search is deterministic per query and queries are
//! independent, so results are bit-identical for any number of threads.
//!
//! The tree only pays where the data are intrinsically low-dimensional:
//! [`Index`] (the core of `gyrokit.NeighborIndex`) measures how many points
//! the tree visits on a sample of searches and falls back to the brute-force
//! kernels of [`crate::pairwise::matrix`] where the tree would be slower
//! (see [`AUTO_MAX_VISITED`]); both give the same results bit for bit.
//!
//! Layout: flat arrays. The points are stored once more, permuted into tree
//! order (so a leaf is a contiguous run of rows); `perm[pos]` is the
//! caller's index of the point at tree position `pos`. Nodes are in
//! preorder: the inside child of node `i` is node `i + 1`. An inner node's
//! vantage point sits at its first position, its inside child covers the
//! next `(size - 1) / 2` positions and its outside child the rest, so the
//! shape of the tree depends on `n` and `leaf_size` alone.

use rayon::prelude::*;
use std::cmp::Ordering;

use crate::batch::Data;
use crate::error::{Error, Result};
use crate::models::ball::Curvature;
use crate::models::Model;
use crate::numeric::simd;
use crate::pairwise::{distance_from_h, matrix, PairSpace, Prepared};

/// Default number of points per leaf. Leaves are scanned brute force; with
/// the cheap pair function of [`Prepared`] (a few ns per pair), leaves of
/// this size balance the cost of descending against the cost of scanning.
pub const DEFAULT_LEAF_SIZE: usize = 16;

/// Relative slack on every pruning test. Computed distances are within a
/// few ulps (~1e-15 relative) of the exact distances of the stored points;
/// 1e-12 covers the triangle inequality evaluated on three of them with a
/// margin of 1000x, and costs nothing measurable in pruning power.
pub const SLACK: f64 = 1e-12;

/// Relative slack of the leaf filter on `h = sinh(d/2R)^2` (in
/// [`VpTree::knn_one`]): with `f = d/R = acosh(1 + 2h)`,
/// `d ln f / d ln h = tanh(f/2)/f >= 0.46/max(f, 1)`, and `f < 711` for any
/// finite `h`, so `h` larger by a factor `1 + 1e-9` means a distance larger
/// by at least 6e-13 relative: far beyond the few-ulp rounding of either.
const H_SLACK: f64 = 1e-9;

/// Points at which a subtree is built in parallel (rayon::join). The tree
/// does not depend on it (nor on the thread count).
const PAR_BUILD: usize = 1 << 14;

/// Queries per parallel task (at most), and queries whose results are held
/// at once before being written out in caller order (at most; the batch
/// shrinks for large k so that it holds about [`BATCH_ENTRIES`] results,
/// bounding the memory held twice). All independent of the thread count.
const QUERY_CHUNK: usize = 256;
const QUERY_BATCH: usize = 1 << 15;
const BATCH_ENTRIES: usize = 1 << 22;

/// `(queries per batch, queries per task)` for `per_query` results a query.
fn batching(per_query: usize) -> (usize, usize) {
    let batch = (BATCH_ENTRIES / per_query.max(1)).clamp(64, QUERY_BATCH);
    (batch, (batch / 64).clamp(1, QUERY_CHUNK))
}

/// One node of the tree, in preorder.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Node {
    /// First tree position of the node (its vantage point if inner).
    pub start: usize,
    /// One past its last position.
    pub end: usize,
    /// Index of the outside child in `nodes`; 0 marks a leaf (node 0 is the
    /// root, never a child).
    pub outside: usize,
    /// Distances from the vantage point to the points of the two children:
    /// `[inside min, inside max, outside min, outside max]`. An empty child
    /// has `[+inf, -inf]` (never visited); a child holding a NaN distance
    /// `[0, +inf]` (never pruned).
    pub bounds: [f64; 4],
}

impl Node {
    #[inline(always)]
    pub fn is_leaf(&self) -> bool {
        self.outside == 0
    }
}

/// The index: points in tree order, the permutation back to the caller's
/// order, and the nodes.
#[derive(Clone, Debug)]
pub struct VpTree {
    /// The points, rows permuted into tree order.
    pub points: Prepared,
    /// `perm[pos]`: the caller's index of the point at tree position `pos`.
    pub perm: Vec<usize>,
    pub nodes: Vec<Node>,
    pub leaf_size: usize,
}

/// The state of a tree as flat arrays (see [`VpTree::to_parts`]).
pub type Parts = (Vec<f64>, Vec<f64>, Vec<i64>, Vec<i64>, Vec<f64>);

/// Result of a radius query: a CSR triple over the query rows.
#[derive(Clone, Debug, PartialEq)]
pub struct Csr {
    pub indptr: Vec<i64>,
    pub indices: Vec<i64>,
    pub distances: Vec<f64>,
}

// ---------------------------------------------------------------------------
// Ordering of candidates

/// Distances compared with NaN above everything (NumPy's sort order), so
/// that the order of candidates is total even for inputs whose pair
/// quantity overflows.
#[inline(always)]
fn cmp_dist(a: f64, b: f64) -> Ordering {
    match a.partial_cmp(&b) {
        Some(o) => o,
        None => a.is_nan().cmp(&b.is_nan()),
    }
}

/// The result order: by distance, ties by the lower index.
#[inline(always)]
fn key_lt(a: (f64, usize), b: (f64, usize)) -> bool {
    match cmp_dist(a.0, b.0) {
        Ordering::Less => true,
        Ordering::Equal => a.1 < b.1,
        Ordering::Greater => false,
    }
}

#[inline(always)]
fn key_cmp(a: &(f64, usize), b: &(f64, usize)) -> Ordering {
    cmp_dist(a.0, b.0).then(a.1.cmp(&b.1))
}

/// Lower bound on `d(q, p)` for every `p` with `d(v, p)` in `[lo, hi]`, given
/// `dq = d(q, v)`, loosened by [`SLACK`] relative to the distances involved
/// (`dq + hi <= 2 dq + |lb|` and `dq + lo = 2 dq + lb`). NaN (from a NaN
/// distance) means "unknown": the comparisons that use it never prune. An
/// empty child (`lo = inf`, `hi = -inf`) gives `+inf`: always skipped.
#[inline(always)]
fn lower_bound(dq: f64, lo: f64, hi: f64) -> f64 {
    let a = dq - hi;
    let b = lo - dq;
    let lb = if a >= b {
        a
    } else if b > a {
        b
    } else {
        return f64::NAN;
    };
    if lb == f64::INFINITY {
        return lb;
    }
    lb - SLACK * (2.0 * dq + lb.abs())
}

/// Whether a subtree whose lower bound is `lb` can hold a point at
/// distance `<= tau` (ties must be visited: they may win on the index).
#[inline(always)]
fn may_hold(lb: f64, tau: f64) -> bool {
    // Not `lb <= ...`: a NaN bound must answer "yes".
    lb.partial_cmp(&(tau + SLACK * tau)) != Some(Ordering::Greater)
}

/// The k best candidates so far, sorted by (distance, index); each carries
/// its `h` for the cheap leaf filter.
struct Best {
    k: usize,
    items: Vec<(f64, usize, f64)>,
    /// Leaf filter: `h` above this cannot enter (inf until full).
    h_cut: f64,
    /// k-th distance so far (inf until full).
    tau: f64,
}

impl Best {
    fn new(k: usize) -> Best {
        Best { k, items: Vec::with_capacity(k + 1), h_cut: f64::INFINITY, tau: f64::INFINITY }
    }

    #[inline(always)]
    fn clear(&mut self) {
        self.items.clear();
        self.h_cut = f64::INFINITY;
        self.tau = f64::INFINITY;
    }

    /// Offers a candidate at distance `d` (pair quantity `h`), caller index `j`.
    #[inline(always)]
    fn offer(&mut self, d: f64, h: f64, j: usize) {
        let full = self.items.len() == self.k;
        if full {
            let last = self.items[self.k - 1];
            if !key_lt((d, j), (last.0, last.1)) {
                return;
            }
            self.items.pop();
        }
        let at = self.items.partition_point(|e| key_lt((e.0, e.1), (d, j)));
        self.items.insert(at, (d, j, h));
        if self.items.len() == self.k {
            let last = self.items[self.k - 1];
            self.tau = last.0;
            // NaN h (never from valid finite points) disables the filter.
            self.h_cut = if last.2.is_nan() { f64::INFINITY } else { last.2 * (1.0 + H_SLACK) };
        }
    }
}

// ---------------------------------------------------------------------------
// Deterministic sampling for the choice of vantage points

/// SplitMix64 (Steele, Lea and Flood, "Fast splittable pseudorandom number
/// generators", OOPSLA 2014): tiny, and seeded per node from its position
/// and size, so the tree never depends on the order nodes are built in.
struct SplitMix(u64);

impl SplitMix {
    fn new(a: usize, b: usize) -> SplitMix {
        SplitMix((a as u64).wrapping_mul(0x9E37_79B9_7F4A_7C15) ^ (b as u64).rotate_left(32) ^ 0x5EED_6B1D)
    }
    fn next(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }
    /// Uniform in `0..n` (n >= 1), by the multiply-shift map.
    fn below(&mut self, n: usize) -> usize {
        (((self.next() >> 32) * (n as u64)) >> 32) as usize
    }
}

/// Candidates tried and sample points used to rate each, by node size.
fn vantage_effort(c: usize) -> (usize, usize) {
    if c >= 4096 {
        (12, 64)
    } else if c >= 256 {
        (6, 32)
    } else {
        (3, 16)
    }
}

/// Picks the vantage point of a node holding `perm` (tree positions from
/// `base`): among a few random candidates, the one whose distances to a
/// random sample have the largest second moment about their median
/// (Yianilos 1993, section 4): a wide spread of distances means a thin
/// shell of points near the median sphere, which is what pruning needs.
#[inline(always)]
fn choose_vantage(pts: &Prepared, base: usize, perm: &[usize]) -> usize {
    let c = perm.len();
    let (ncand, nsample) = vantage_effort(c);
    let mut rng = SplitMix::new(base, c);
    let sample: Vec<usize> = (0..nsample.min(c)).map(|_| perm[rng.below(c)]).collect();
    let mut ds = vec![0.0f64; sample.len()];
    let mut best = (f64::NEG_INFINITY, 0usize);
    for _ in 0..ncand.min(c) {
        let cand = rng.below(c);
        let v = perm[cand];
        for (d, &s) in ds.iter_mut().zip(&sample) {
            *d = pts.distance(v, pts, s);
        }
        let mid = ds.len() / 2;
        ds.select_nth_unstable_by(mid, |a, b| cmp_dist(*a, *b));
        let med = ds[mid];
        let spread: f64 = ds.iter().map(|d| (d - med) * (d - med)).sum();
        // NaN spreads (overflowing pairs) never win over a real one.
        if spread > best.0 {
            best = (spread, cand);
        }
    }
    best.1
}

// ---------------------------------------------------------------------------
// Building

/// Number of nodes of a tree over `c` points: a function of `c` and the leaf
/// size alone, which lets parallel subtrees fill disjoint parts of the node
/// array with their final indices.
fn node_count(c: usize, leaf: usize) -> usize {
    if c <= leaf {
        1
    } else {
        let ins = (c - 1) / 2;
        1 + node_count(ins, leaf) + node_count(c - 1 - ins, leaf)
    }
}

/// `[min, max]` of the distances from the vantage point to a child's points,
/// given their `h`: the distance of the extreme `h`s, widened by 4 ulps since
/// the computed distance is monotone in `h` only up to its rounding. `[0,
/// inf]` if an `h` is NaN (never prune), `[inf, -inf]` if empty (never
/// visit).
fn child_bounds(pts: &Prepared, items: &[(f64, usize)]) -> [f64; 2] {
    if items.is_empty() {
        return [f64::INFINITY, f64::NEG_INFINITY];
    }
    let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
    for &(h, _) in items {
        if h.is_nan() {
            return [0.0, f64::INFINITY];
        }
        lo = lo.min(h);
        hi = hi.max(h);
    }
    let dist = |h: f64| distance_from_h(&pts.curvature, h);
    let (dlo, dhi) = (dist(lo), dist(hi));
    if dlo.is_nan() || dhi.is_nan() {
        return [0.0, f64::INFINITY];
    }
    [dlo * (1.0 - 4.0 * f64::EPSILON), dhi * (1.0 + 4.0 * f64::EPSILON)]
}

struct Builder<'a> {
    pts: &'a Prepared,
    leaf: usize,
    /// Whether the AVX2+FMA copies of the distance loops can run (the
    /// dispatch is per loop: rayon tasks start outside any dispatched copy).
    fast: bool,
}

impl Builder<'_> {
    /// Builds the subtree over `perm` (tree positions `base..`) into `nodes`
    /// (global index of `nodes[0]` is `nbase`); `scratch` is as long as
    /// `perm`.
    fn build(&self, base: usize, perm: &mut [usize], scratch: &mut [(f64, usize)], nodes: &mut [Node], nbase: usize) {
        let c = perm.len();
        if c <= self.leaf {
            nodes[0] = Node { start: base, end: base + c, outside: 0, bounds: [0.0; 4] };
            return;
        }
        let v = simd::dispatch(
            self.fast,
            #[inline(always)]
            || choose_vantage(self.pts, base, perm),
        );
        perm.swap(0, v);
        let vp = perm[0];
        let rest = &mut scratch[1..c];
        let pts = self.pts;
        // Split on h = sinh(d/2R)^2, which orders pairs like the distance
        // without a transcendental; the bounds below are what pruning relies
        // on, and they are taken as distances.
        simd::dispatch(
            self.fast,
            #[inline(always)]
            || {
                for (s, &j) in rest.iter_mut().zip(&perm[1..]) {
                    *s = (pts.half_delta(vp, pts, j), j);
                }
            },
        );
        let ins = (c - 1) / 2;
        if ins > 0 {
            // (h, index) is a total order: the split is one well-defined set
            // whatever the selection algorithm does.
            rest.select_nth_unstable_by(ins, key_cmp);
        }
        let bi = child_bounds(pts, &rest[..ins]);
        let bo = child_bounds(pts, &rest[ins..]);
        for (p, s) in perm[1..].iter_mut().zip(rest.iter()) {
            *p = s.1;
        }
        let n_in = node_count(ins, self.leaf);
        let (head, tail) = nodes.split_at_mut(1);
        let (nodes_in, nodes_out) = tail.split_at_mut(n_in);
        head[0] = Node { start: base, end: base + c, outside: nbase + 1 + n_in, bounds: [bi[0], bi[1], bo[0], bo[1]] };
        let (p_in, p_out) = perm[1..].split_at_mut(ins);
        let (s_in, s_out) = scratch[1..].split_at_mut(ins);
        let mut left = move || self.build(base + 1, p_in, s_in, nodes_in, nbase + 1);
        let mut right = move || self.build(base + 1 + ins, p_out, s_out, nodes_out, nbase + 1 + n_in);
        if c >= PAR_BUILD {
            rayon::join(left, right);
        } else {
            left();
            right();
        }
    }
}

/// Validates query points `y` (argument "y") against indexed points `pts`:
/// same model, curvature and width.
pub fn prepare_queries(pts: &Prepared, y: &Data) -> Result<Prepared> {
    let shape = y.shape();
    // Check the width first, so that a wrong d is reported as such even
    // when the rows would also fail the model's domain check.
    if shape.len() == 2 {
        let want = pts.model.width(pts.w);
        if shape[1] != want {
            return Err(Error::Value(format!(
                "mismatched point dimension: the index holds points with {want} coordinates but y has {}",
                shape[1]
            )));
        }
    }
    let q = Prepared::new(pts.model, pts.curvature, "y", y)?;
    pts.check_compatible(&q, ("the index", "y"))?;
    Ok(q)
}

/// Rows `order` of `p`, in that order (a permutation, or a selection).
fn permuted(p: &Prepared, order: &[usize]) -> Prepared {
    p.select(order)
}

/// Values per point in the saved state: the pair-space coordinates, then
/// the refinement data (see `pairwise`).
pub fn state_width(p: &Prepared) -> usize {
    p.w + p.extra_width()
}

/// The stored state of prepared points, `(rows (n state_width), aux (n))`,
/// for pickling. With [`prepared_from_parts`], the only code here that
/// knows the layout of [`Prepared`].
pub fn prepared_parts(p: &Prepared) -> (Vec<f64>, Vec<f64>) {
    let mut rows = Vec::with_capacity(p.n * state_width(p));
    for i in 0..p.n {
        rows.extend_from_slice(p.row(i));
        rows.extend_from_slice(p.extra_row(i));
    }
    (rows, p.aux.clone())
}

/// Prepared points from [`prepared_parts`], checked (a corrupted state is
/// a `ValueError`): at least one point, a row width that fits the model,
/// finite values, finite positive factors.
pub fn prepared_from_parts(
    model: Model,
    curvature: Curvature,
    state_width: usize,
    rows: Vec<f64>,
    aux: Vec<f64>,
) -> Result<Prepared> {
    let bad = |what: &str| Err(Error::Value(format!("invalid NeighborIndex state: {what}")));
    let n = aux.len();
    let space = PairSpace::of(model);
    // The pair-space width from the row width w + extra_width(w).
    let w = match space {
        PairSpace::Own => state_width,
        PairSpace::Hub => state_width / 2,
        PairSpace::HubFar => state_width.saturating_sub(1) / 3,
    };
    if w == 0 || n == 0 || w + space.extra_width(w) != state_width {
        return bad("empty index, or a row width that does not fit the model");
    }
    if n.checked_mul(state_width) != Some(rows.len()) {
        return bad("coordinate array does not match the number of points");
    }
    if !rows.iter().all(|v| v.is_finite()) || !aux.iter().all(|a| a.is_finite() && *a > 0.0) {
        return bad("non-finite coordinates or factors");
    }
    let mut coords = Vec::with_capacity(n * w);
    let mut extra = Vec::with_capacity(n * (state_width - w));
    for r in rows.chunks_exact(state_width) {
        coords.extend_from_slice(&r[..w]);
        extra.extend_from_slice(&r[w..]);
    }
    Prepared::from_parts(model, curvature, w, coords, aux, extra)
}

/// Checks `k` against the candidates of a query: the `n` indexed points
/// for external queries, `n - 1` for the indexed points themselves.
fn check_k(external: bool, n: usize, k: usize) -> Result<()> {
    let cands = if external { n } else { n.saturating_sub(1) };
    if k < 1 {
        return Err(Error::Value(format!("k must be at least 1, got {k}")));
    }
    if k > cands {
        let what = if external {
            format!("the index holds {cands} points")
        } else {
            format!("each indexed point has {cands} others (self-matches are excluded when y is None)")
        };
        return Err(Error::Value(format!("k = {k} is larger than the number of candidates: {what}")));
    }
    Ok(())
}

fn check_r(r: f64) -> Result<()> {
    if r.is_nan() || r < 0.0 {
        return Err(Error::Value(format!("r must be a non-negative number, got {r}")));
    }
    Ok(())
}

/// Room for `len` results, or a `ValueError` instead of an abort.
fn alloc<T: Clone + Default>(len: Option<usize>, what: &str) -> Result<Vec<T>> {
    let mut v = Vec::new();
    match len {
        Some(l) if v.try_reserve_exact(l).is_ok() => {
            v.resize(l, T::default());
            Ok(v)
        }
        _ => Err(Error::Value(format!("{what} would not fit in memory"))),
    }
}

impl VpTree {
    /// Validates `x` (argument name `name` in messages) and builds the tree.
    pub fn new(model: Model, curvature: Curvature, name: &str, x: &Data, leaf_size: usize) -> Result<VpTree> {
        let pts = Prepared::new(model, curvature, name, x)?;
        VpTree::from_prepared(&pts, leaf_size, name)
    }

    /// Builds the tree over already prepared points (copied into tree
    /// order; `pts` itself is left as it is).
    pub fn from_prepared(pts: &Prepared, leaf_size: usize, name: &str) -> Result<VpTree> {
        if leaf_size == 0 {
            return Err(Error::Value("leaf_size must be at least 1".into()));
        }
        let n = pts.n;
        if n == 0 {
            return Err(Error::Value(format!("{name} must hold at least one point to build an index; got 0 rows")));
        }
        let mut perm: Vec<usize> = (0..n).collect();
        let mut scratch = vec![(0.0f64, 0usize); n];
        let mut nodes = vec![Node { start: 0, end: 0, outside: 0, bounds: [0.0; 4] }; node_count(n, leaf_size)];
        Builder { pts, leaf: leaf_size, fast: simd::has_fma() }.build(0, &mut perm, &mut scratch, &mut nodes, 0);
        drop(scratch);
        let points = permuted(pts, &perm);
        Ok(VpTree { points, perm, nodes, leaf_size })
    }

    pub fn n(&self) -> usize {
        self.points.n
    }

    /// Bytes held by the index (points, permutation, nodes).
    pub fn nbytes(&self) -> usize {
        let p = &self.points;
        8 * (p.coords.len() + p.aux.len() + p.extra.len() + self.perm.len())
            + std::mem::size_of::<Node>() * self.nodes.len()
    }

    /// Prepares query points `y` (argument "y") for this index.
    pub fn prepare_queries(&self, y: &Data) -> Result<Prepared> {
        prepare_queries(&self.points, y)
    }

    /// The distance the index reports for the pair (query row `qi` of `q`,
    /// tree position `pos`): [`Prepared::distance`] split so that the leaf
    /// filter can look at `h` first.
    #[inline(always)]
    fn dist_from_h(&self, q: &Prepared, h: f64) -> f64 {
        distance_from_h(&q.curvature, h)
    }

    /// The k nearest of query row `qi` of `q` into `best`, skipping tree
    /// position `skip` (the query itself when querying the indexed points).
    ///
    /// Returns the number of pair evaluations spent; the search stops early
    /// (leaving `best` incomplete) once that number exceeds `budget`, which
    /// only [`VpTree::visited_fraction`] sets below `usize::MAX`.
    #[inline(always)]
    fn knn_one(
        &self,
        q: &Prepared,
        qi: usize,
        skip: usize,
        best: &mut Best,
        stack: &mut Vec<(usize, f64)>,
        budget: usize,
    ) -> usize {
        best.clear();
        stack.clear();
        stack.push((0, f64::NEG_INFINITY));
        let pts = &self.points;
        let mut evals = 0usize;
        while let Some((ni, lb)) = stack.pop() {
            if evals > budget {
                break;
            }
            if !may_hold(lb, best.tau) {
                continue;
            }
            let node = self.nodes[ni];
            evals += if node.is_leaf() { node.end - node.start } else { 1 };
            if node.is_leaf() {
                for pos in node.start..node.end {
                    if pos == skip {
                        continue;
                    }
                    let h = q.half_delta(qi, pts, pos);
                    // Cheap filter: a clearly larger h means a larger
                    // distance (see H_SLACK), so the transcendental is spent
                    // only on candidates that may enter.
                    if h > best.h_cut {
                        continue;
                    }
                    best.offer(self.dist_from_h(q, h), h, self.perm[pos]);
                }
                continue;
            }
            let vp = node.start;
            let h = q.half_delta(qi, pts, vp);
            let dq = self.dist_from_h(q, h);
            if vp != skip {
                best.offer(dq, h, self.perm[vp]);
            }
            let b = node.bounds;
            let l_in = lower_bound(dq, b[0], b[1]);
            let l_out = lower_bound(dq, b[2], b[3]);
            // Nearer side first (popped first), so tau shrinks early.
            let inside_first = l_out.partial_cmp(&l_in) != Some(Ordering::Less);
            let (inside, outside) = ((ni + 1, l_in), (node.outside, l_out));
            let (first, second) = if inside_first { (inside, outside) } else { (outside, inside) };
            if may_hold(second.1, best.tau) {
                stack.push(second);
            }
            if may_hold(first.1, best.tau) {
                stack.push(first);
            }
        }
        evals
    }

    /// All points within distance `r` of query row `qi` (pair quantity
    /// filter `h_r`), unsorted, into `out`.
    #[inline(always)]
    fn radius_one(
        &self,
        q: &Prepared,
        qi: usize,
        skip: usize,
        (r, h_r): (f64, f64),
        out: &mut Vec<(f64, usize)>,
        stack: &mut Vec<(usize, f64)>,
    ) {
        out.clear();
        stack.clear();
        stack.push((0, f64::NEG_INFINITY));
        let pts = &self.points;
        while let Some((ni, _)) = stack.pop() {
            let node = self.nodes[ni];
            if node.is_leaf() {
                for pos in node.start..node.end {
                    if pos == skip {
                        continue;
                    }
                    let h = q.half_delta(qi, pts, pos);
                    if h > h_r {
                        continue;
                    }
                    let d = self.dist_from_h(q, h);
                    if d <= r {
                        out.push((d, self.perm[pos]));
                    }
                }
                continue;
            }
            let vp = node.start;
            let dq = self.dist_from_h(q, q.half_delta(qi, pts, vp));
            if vp != skip && dq <= r {
                out.push((dq, self.perm[vp]));
            }
            let b = node.bounds;
            let l_out = lower_bound(dq, b[2], b[3]);
            if may_hold(l_out, r) {
                stack.push((node.outside, l_out));
            }
            let l_in = lower_bound(dq, b[0], b[1]);
            if may_hold(l_in, r) {
                stack.push((ni + 1, l_in));
            }
        }
    }

    /// Runs the queries in parallel tasks of up to [`QUERY_CHUNK`] queries
    /// (`per_query`: results per query, which sizes the batches):
    /// `chunk(q, queries, count)` answers `count` queries given as (row of
    /// `q`, tree position to skip) pairs, and `sink(row_of, result)`
    /// receives each task's result, `row_of(t)` being the caller's row of
    /// its `t`-th query. Without `y` the queries are the indexed points
    /// taken in tree order (each skipping itself), so that consecutive
    /// queries walk the same paths (cache locality). Results are handed over
    /// batch by batch (see [`batching`]), which bounds the memory
    /// held twice. Each query is answered on its own, so neither the order
    /// nor the thread count changes any result.
    fn run<C, F, S>(&self, y: Option<&Prepared>, per_query: usize, chunk: F, mut sink: S)
    where
        C: Send,
        F: Fn(&Prepared, &mut dyn Iterator<Item = (usize, usize)>, usize) -> C + Sync,
        S: FnMut(&dyn Fn(usize) -> usize, C),
    {
        let (q, m) = match y {
            Some(q) => (q, q.n),
            None => (&self.points, self.points.n),
        };
        let self_query = y.is_none();
        let (batch, task) = batching(per_query);
        // Caller's query rows in processing order: tree order for the indexed
        // points; for other queries, the order of the leaves they fall in.
        let owned;
        let order: &[usize] = match y {
            Some(q) => {
                owned = self.locality_order(q);
                &owned
            }
            None => &self.perm,
        };
        let mut start = 0;
        while start < m {
            let end = (start + batch).min(m);
            let starts: Vec<usize> = (start..end).step_by(task).collect();
            let results: Vec<C> = starts
                .par_iter()
                .map(|&c0| {
                    let c1 = (c0 + task).min(end);
                    if self_query {
                        chunk(q, &mut (c0..c1).map(|pos| (pos, pos)), c1 - c0)
                    } else {
                        chunk(q, &mut order[c0..c1].iter().map(|&i| (i, usize::MAX)), c1 - c0)
                    }
                })
                .collect();
            for (&c0, res) in starts.iter().zip(results) {
                sink(&|t: usize| order[c0 + t], res);
            }
            start = end;
        }
    }

    /// Query rows sorted by the leaf each falls in (descending to the nearer
    /// side at every node), so that consecutive queries share their paths
    /// and leaves in cache: external queries in random order ran ~3x slower
    /// per query than the indexed points taken in tree order. Ties keep the
    /// caller's order, so the order is deterministic.
    fn locality_order(&self, q: &Prepared) -> Vec<usize> {
        let fast = simd::has_fma();
        let pts = &self.points;
        let mut keys: Vec<(usize, usize)> = (0..q.n)
            .into_par_iter()
            .with_min_len(QUERY_CHUNK)
            .map(|i| {
                simd::dispatch(
                    fast,
                    #[inline(always)]
                    || {
                        let mut ni = 0;
                        loop {
                            let node = self.nodes[ni];
                            if node.is_leaf() {
                                return (node.start, i);
                            }
                            let dq = self.dist_from_h(q, q.half_delta(i, pts, node.start));
                            let b = node.bounds;
                            let inside = lower_bound(dq, b[0], b[1]) <= lower_bound(dq, b[2], b[3]);
                            ni = if inside { ni + 1 } else { node.outside };
                        }
                    },
                )
            })
            .collect();
        keys.par_sort_unstable();
        keys.into_iter().map(|k| k.1).collect()
    }

    /// The `k` nearest indexed points of every query row (the indexed points
    /// themselves, each excluding itself, when `y` is `None`): row-major
    /// `(m, k)` indices and distances, each row ascending by (distance,
    /// index).
    pub fn query(&self, y: Option<&Prepared>, k: usize) -> Result<(Vec<i64>, Vec<f64>)> {
        check_k(y.is_some(), self.n(), k)?;
        let m = y.map_or(self.n(), |q| q.n);
        let total = m.checked_mul(k);
        let mut idx: Vec<i64> = alloc(total, "the (m, k) result")?;
        let mut dist: Vec<f64> = alloc(total, "the (m, k) result")?;
        let fast = simd::has_fma();
        let chunk = |q: &Prepared, queries: &mut dyn Iterator<Item = (usize, usize)>, count: usize| {
            let mut best = Best::new(k);
            let mut stack = Vec::with_capacity(64);
            let mut out: Vec<(f64, usize)> = Vec::with_capacity(count * k);
            simd::dispatch(
                fast,
                #[inline(always)]
                || {
                    for (i, skip) in queries {
                        self.knn_one(q, i, skip, &mut best, &mut stack, usize::MAX);
                        out.extend(best.items.iter().map(|e| (e.0, e.1)));
                    }
                },
            );
            out
        };
        self.run(y, k, chunk, |row_of, out| {
            for (t, row) in out.chunks_exact(k).enumerate() {
                let r = row_of(t);
                for (s, e) in row.iter().enumerate() {
                    idx[r * k + s] = e.1 as i64;
                    dist[r * k + s] = e.0;
                }
            }
        });
        Ok((idx, dist))
    }

    /// All indexed points within distance `r` (inclusive) of every query row
    /// (self-matches excluded when `y` is `None`), as a CSR triple, each row
    /// ascending by (distance, index).
    pub fn query_radius(&self, y: Option<&Prepared>, r: f64) -> Result<Csr> {
        check_r(r)?;
        let m = y.map_or(self.n(), |q| q.n);
        // The leaf filter on h: sinh(r/2R)^2 loosened so that it is safe
        // whatever the rounding of sinh (see H_SLACK; 1e-6 dwarfs it).
        let radius = self.points.curvature.radius;
        let s = (r / (2.0 * radius)).sinh();
        let h_r = if s.is_finite() { s * s * (1.0 + 1e-6) + f64::MIN_POSITIVE } else { f64::INFINITY };
        let fast = simd::has_fma();
        let chunk = |q: &Prepared, queries: &mut dyn Iterator<Item = (usize, usize)>, _count: usize| {
            let mut stack = Vec::with_capacity(64);
            simd::dispatch(
                fast,
                #[inline(always)]
                || {
                    queries
                        .map(|(i, skip)| {
                            let mut out = Vec::new();
                            self.radius_one(q, i, skip, (r, h_r), &mut out, &mut stack);
                            out.sort_unstable_by(key_cmp);
                            out
                        })
                        .collect::<Vec<_>>()
                },
            )
        };
        let mut rows: Vec<Vec<(f64, usize)>> = vec![Vec::new(); m];
        self.run(y, 1, chunk, |row_of, res| {
            for (t, v) in res.into_iter().enumerate() {
                rows[row_of(t)] = v;
            }
        });
        let total: usize = rows.iter().map(|r| r.len()).sum();
        let mut indptr = Vec::with_capacity(m + 1);
        let mut indices: Vec<i64> = Vec::new();
        let mut distances: Vec<f64> = Vec::new();
        if indices.try_reserve_exact(total).is_err() || distances.try_reserve_exact(total).is_err() {
            return Err(Error::Value("the radius query result would not fit in memory".into()));
        }
        indptr.push(0i64);
        for row in rows {
            for (d, j) in row {
                indices.push(j as i64);
                distances.push(d);
            }
            indptr.push(indices.len() as i64);
        }
        Ok(Csr { indptr, indices, distances })
    }

    /// Mean number of pair evaluations of a `k`-nearest search, as a
    /// fraction of `n`, over `samples` indexed points spread evenly over the
    /// tree (each excluding itself): the measured pruning efficiency. Each
    /// search is cut off after `cap n` evaluations (and counted as that), so
    /// the estimate costs at most `samples cap n` evaluations. A count, not
    /// a time: the same data always gives the same figure.
    pub fn visited_fraction(&self, k: usize, samples: usize, cap: f64) -> f64 {
        let n = self.n();
        let k = k.min(n.saturating_sub(1));
        if k == 0 {
            return 1.0;
        }
        let s = samples.clamp(1, n);
        let budget = ((cap.clamp(0.0, 1.0) * n as f64) as usize).max(1);
        let fast = simd::has_fma();
        let total: usize = (0..s)
            .into_par_iter()
            .map(|t| {
                let pos = ((2 * t + 1) * n) / (2 * s);
                let mut best = Best::new(k);
                let mut stack = Vec::with_capacity(64);
                simd::dispatch(
                    fast,
                    #[inline(always)]
                    || self.knn_one(&self.points, pos, pos, &mut best, &mut stack, budget),
                )
                .min(budget)
            })
            .sum();
        total as f64 / (s as f64 * n as f64)
    }

    /// Every pair distance the index would report, row-major `(m, n)` in
    /// the caller's column order: the brute force the tree must agree with
    /// (for tests). Without `y`, row `i` is indexed point `i`.
    pub fn distances(&self, y: Option<&Prepared>) -> Result<Vec<f64>> {
        let n = self.n();
        let m = y.map_or(n, |q| q.n);
        let mut out: Vec<f64> = alloc(m.checked_mul(n), "the (m, n) distance matrix")?;
        let mut inv = vec![0usize; n];
        for (pos, &i) in self.perm.iter().enumerate() {
            inv[i] = pos;
        }
        let (q, pts) = (y.unwrap_or(&self.points), &self.points);
        let fast = simd::has_fma();
        if n > 0 {
            out.par_chunks_mut(n).enumerate().for_each(|(i, row)| {
                let qi = if y.is_some() { i } else { inv[i] };
                simd::dispatch(
                    fast,
                    #[inline(always)]
                    || {
                        for pos in 0..n {
                            row[self.perm[pos]] = q.distance(qi, pts, pos);
                        }
                    },
                );
            });
        }
        Ok(out)
    }

    // -----------------------------------------------------------------------
    // State (pickling): the tree is saved, not rebuilt.

    /// The state as flat arrays: `(coords (n*w), aux (n), perm (n),
    /// node_ints (3 per node: start, end, outside), node_bounds (4 per node))`.
    pub fn to_parts(&self) -> Parts {
        let perm = self.perm.iter().map(|&i| i as i64).collect();
        let mut ints = Vec::with_capacity(3 * self.nodes.len());
        let mut bounds = Vec::with_capacity(4 * self.nodes.len());
        for nd in &self.nodes {
            ints.extend_from_slice(&[nd.start as i64, nd.end as i64, nd.outside as i64]);
            bounds.extend_from_slice(&nd.bounds);
        }
        let (coords, aux) = prepared_parts(&self.points);
        (coords, aux, perm, ints, bounds)
    }

    /// Rebuilds an index from [`VpTree::to_parts`], checking everything a
    /// query relies on (a corrupted state is a `ValueError`, never a panic
    /// or an out-of-range access).
    pub fn from_parts(
        model: Model,
        curvature: Curvature,
        leaf_size: usize,
        w: usize,
        coords: Vec<f64>,
        aux: Vec<f64>,
        perm: &[i64],
        ints: &[i64],
        bounds: &[f64],
    ) -> Result<VpTree> {
        let bad = |what: &str| Err(Error::Value(format!("invalid NeighborIndex state: {what}")));
        if leaf_size == 0 {
            return bad("zero leaf size");
        }
        let points = prepared_from_parts(model, curvature, w, coords, aux)?;
        let n = points.n;
        if perm.len() != n {
            return bad("permutation length");
        }
        let mut seen = vec![false; n];
        let mut p = Vec::with_capacity(n);
        for &i in perm {
            if i < 0 || i as u64 >= n as u64 || seen[i as usize] {
                return bad("the permutation is not a permutation of 0..n");
            }
            seen[i as usize] = true;
            p.push(i as usize);
        }
        let nn = ints.len() / 3;
        if ints.len() != 3 * nn || bounds.len() != 4 * nn || nn == 0 {
            return bad("node arrays");
        }
        let mut nodes = Vec::with_capacity(nn);
        for t in 0..nn {
            let v = &ints[3 * t..3 * t + 3];
            if v.iter().any(|&x| x < 0) {
                return bad("negative node field");
            }
            let b = &bounds[4 * t..4 * t + 4];
            nodes.push(Node {
                start: v[0] as usize,
                end: v[1] as usize,
                outside: v[2] as usize,
                bounds: [b[0], b[1], b[2], b[3]],
            });
        }
        // Walk the tree once: every node reached exactly once, ranges nested
        // exactly as the search assumes (inside child = next node, covering
        // the positions after the vantage point up to the outside child).
        let mut visited = 0usize;
        let mut stack = vec![(0usize, 0usize, n)];
        while let Some((i, s, e)) = stack.pop() {
            let nd = match nodes.get(i) {
                Some(nd) => *nd,
                None => return bad("node index out of range"),
            };
            if nd.start != s || nd.end != e || s > e {
                return bad("node range");
            }
            visited += 1;
            if visited > nn {
                return bad("node graph");
            }
            if nd.is_leaf() {
                continue;
            }
            if e <= s || nd.outside <= i + 1 || nd.outside >= nn || i + 1 >= nn {
                return bad("inner node");
            }
            let mid = nodes[nd.outside].start;
            if mid < s + 1 || mid > e || nodes[i + 1].start != s + 1 || nodes[i + 1].end != mid {
                return bad("child ranges");
            }
            stack.push((nd.outside, mid, e));
            stack.push((i + 1, s + 1, mid));
        }
        if visited != nn {
            return bad("unreachable nodes");
        }
        Ok(VpTree { points, perm: p, nodes, leaf_size })
    }
}

// ---------------------------------------------------------------------------
// The index: the tree where it prunes, brute force where it cannot

/// The first look of the `auto` rule (see [`PRECHECK_N`]): the visited
/// fraction of a tree over evenly spaced rows if it says brute force, None
/// if the full tree is to be measured.
fn first_look(pts: &Prepared, leaf_size: usize, name: &str) -> Result<Option<f64>> {
    if pts.n <= PRECHECK_N {
        return Ok(None);
    }
    let rows: Vec<usize> = (0..PRECHECK_N).map(|t| t * pts.n / PRECHECK_N).collect();
    let sub = VpTree::from_prepared(&permuted(pts, &rows), leaf_size, name)?;
    let f = sub.visited_fraction(AUTO_K, AUTO_SAMPLES, 1.0);
    Ok((f >= PRECHECK_HOPELESS).then_some(f))
}

/// How an [`Index`] answers queries.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Method {
    /// Measure the tree's pruning on the data, then keep the cheaper of the
    /// two (see [`Index::new`]).
    Auto,
    /// The vantage-point tree.
    Tree,
    /// The brute-force kernels of [`crate::pairwise::matrix`].
    Brute,
}

impl Method {
    /// Parses the `method` argument.
    pub fn parse(s: &str) -> Result<Method> {
        match s {
            "auto" => Ok(Method::Auto),
            "tree" => Ok(Method::Tree),
            "brute" => Ok(Method::Brute),
            _ => Err(Error::Value(format!("method must be 'auto', 'tree' or 'brute'; got {s:?}"))),
        }
    }

    pub fn name(self) -> &'static str {
        match self {
            Method::Auto => "auto",
            Method::Tree => "tree",
            Method::Brute => "brute",
        }
    }
}

/// Sample searches of the `auto` rule, and their `k`.
pub const AUTO_SAMPLES: usize = 64;
pub const AUTO_K: usize = 10;

/// The quick first look of the `auto` rule: above `PRECHECK_N` points, a
/// tree over `PRECHECK_N` evenly spaced rows is measured first, and if its
/// searches visit more than `PRECHECK_HOPELESS` of those rows, brute force
/// is chosen without building the full tree. Where the tree prunes, a
/// search visits a few hundred points whatever n (network maps in the disk:
/// about 280 for k = 10 from 5 000 to 1 000 000 points); visiting half of
/// 4096 means data of higher intrinsic dimension m, whose fraction falls
/// only like n^(-1/m): from 1/2 it would reach [`AUTO_MAX_VISITED`] at 1000
/// times the points for m = 3. The first look costs a few ms where the full
/// tree cost 25 to 55 ms (d = 16, n = 20 000 and d = 10, n = 50 000: 2 to 3 %
/// of the whole query).
pub const PRECHECK_N: usize = 4096;
pub const PRECHECK_HOPELESS: f64 = 0.5;

/// The `auto` rule keeps the tree when its sample searches evaluate at most
/// this fraction of the points. Measured (k = 10, n = 10 000 to 20 000,
/// d = 2 to 16, one run on 2 cores): one pair evaluated by the tree (scalar,
/// on a data-dependent walk) cost as much as 8 to 12 pairs of the tiled
/// brute-force kernel where the tree visits most points, and 20 to 34 where
/// it visits 1 to 3 % of them (the walk's overhead per point grows); the
/// tree won at a visited fraction of 0.026 (0.53x brute force) and lost at
/// 0.16 (2.2x). 1/20 keeps it only where it clearly wins.
pub const AUTO_MAX_VISITED: f64 = 0.05;

/// What an index holds: a tree, or the points in the caller's order.
#[derive(Clone, Debug)]
pub enum Engine {
    Tree(VpTree),
    Brute(Prepared),
}

/// An exact neighbour index: a vantage-point tree or brute force, with
/// identical results (distances bit for bit, order by (distance, index)).
#[derive(Clone, Debug)]
pub struct Index {
    pub engine: Engine,
    pub leaf_size: usize,
    /// The tree's measured visited fraction when `auto` chose ([`VpTree::visited_fraction`]); NaN otherwise.
    pub visited: f64,
}

impl Index {
    /// Validates `x` (named `name` in messages) and builds an index.
    /// `Method::Auto` builds the tree (`O(n log n)`, cheap beside any
    /// all-points query), measures [`VpTree::visited_fraction`] for
    /// [`AUTO_K`] neighbours of [`AUTO_SAMPLES`] points, and keeps the tree
    /// when it is at most [`AUTO_MAX_VISITED`], brute force otherwise;
    /// above [`PRECHECK_N`] points a first look at a tree over a subset
    /// may settle for brute force before the full tree is built.
    pub fn new(
        model: Model,
        curvature: Curvature,
        name: &str,
        x: &Data,
        leaf_size: usize,
        method: Method,
    ) -> Result<Index> {
        let pts = Prepared::new(model, curvature, name, x)?;
        Index::from_prepared(pts, leaf_size, method, name)
    }

    pub fn from_prepared(pts: Prepared, leaf_size: usize, method: Method, name: &str) -> Result<Index> {
        if leaf_size == 0 {
            return Err(Error::Value("leaf_size must be at least 1".into()));
        }
        if pts.n == 0 {
            return Err(Error::Value(format!("{name} must hold at least one point to build an index; got 0 rows")));
        }
        let (engine, visited) = match method {
            Method::Brute => (Engine::Brute(pts), f64::NAN),
            Method::Tree => (Engine::Tree(VpTree::from_prepared(&pts, leaf_size, name)?), f64::NAN),
            Method::Auto => match first_look(&pts, leaf_size, name)? {
                Some(f) => (Engine::Brute(pts), f),
                None => {
                    let tree = VpTree::from_prepared(&pts, leaf_size, name)?;
                    let f = tree.visited_fraction(AUTO_K, AUTO_SAMPLES, 2.0 * AUTO_MAX_VISITED);
                    if f <= AUTO_MAX_VISITED {
                        (Engine::Tree(tree), f)
                    } else {
                        (Engine::Brute(pts), f)
                    }
                }
            },
        };
        Ok(Index { engine, leaf_size, visited })
    }

    /// The method in use (never `Auto`).
    pub fn method(&self) -> Method {
        match self.engine {
            Engine::Tree(_) => Method::Tree,
            Engine::Brute(_) => Method::Brute,
        }
    }

    /// The indexed points (in tree order for a tree).
    pub fn points(&self) -> &Prepared {
        match &self.engine {
            Engine::Tree(t) => &t.points,
            Engine::Brute(p) => p,
        }
    }

    pub fn n(&self) -> usize {
        self.points().n
    }

    /// Bytes held by the index.
    pub fn nbytes(&self) -> usize {
        match &self.engine {
            Engine::Tree(t) => t.nbytes(),
            Engine::Brute(p) => 8 * (p.coords.len() + p.aux.len() + p.extra.len()),
        }
    }

    /// Prepares query points `y` (argument "y") for this index.
    pub fn prepare_queries(&self, y: &Data) -> Result<Prepared> {
        prepare_queries(self.points(), y)
    }

    /// The `k` nearest indexed points of every query row (the indexed
    /// points themselves, each excluding itself, when `y` is `None`), as in
    /// [`VpTree::query`], whichever the method.
    pub fn query(&self, y: Option<&Prepared>, k: usize) -> Result<(Vec<i64>, Vec<f64>)> {
        match &self.engine {
            Engine::Tree(t) => t.query(y, k),
            Engine::Brute(p) => {
                // The tree's checks and messages, so that both methods
                // refuse the same k in the same words.
                check_k(y.is_some(), p.n, k)?;
                match y {
                    Some(q) => matrix::knn(q, p, k, false),
                    None => matrix::knn(p, p, k, true),
                }
            }
        }
    }

    /// All indexed points within distance `r` (inclusive) of every query
    /// row, as in [`VpTree::query_radius`], whichever the method.
    pub fn query_radius(&self, y: Option<&Prepared>, r: f64) -> Result<Csr> {
        match &self.engine {
            Engine::Tree(t) => t.query_radius(y, r),
            Engine::Brute(p) => {
                check_r(r)?;
                let (indptr, indices, distances) = match y {
                    Some(q) => matrix::radius_neighbors(q, p, r, false)?,
                    None => matrix::radius_neighbors(p, p, r, true)?,
                };
                Ok(Csr { indptr, indices, distances })
            }
        }
    }

    /// Every distance the index would report, row-major `(m, n)` in the
    /// caller's order (for tests).
    pub fn distances(&self, y: Option<&Prepared>) -> Result<Vec<f64>> {
        match &self.engine {
            Engine::Tree(t) => t.distances(y),
            Engine::Brute(p) => {
                let q = y.unwrap_or(p);
                let mut out: Vec<f64> = alloc(q.n.checked_mul(p.n), "the (m, n) distance matrix")?;
                matrix::distance_matrix_into(q, p, &mut out)?;
                Ok(out)
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use ndarray::{Array2, ArrayViewD};

    /// Random points of `model` for curvature `k`: hyperbolic radii uniform
    /// in `[0, rmax]` about the origin, directions from a Gaussian.
    fn points(model: Model, k: &Curvature, n: usize, d: usize, rmax: f64, seed: u64) -> Array2<f64> {
        let mut rng = SplitMix(seed);
        let mut unif = move || (rng.next() >> 11) as f64 / (1u64 << 53) as f64;
        let w = model.width(d);
        let mut out = Array2::zeros((n, w));
        let rr = k.radius;
        for i in 0..n {
            let mut v: Vec<f64> = (0..d)
                .map(|_| {
                    // Box-Muller
                    let (a, b) = (unif().max(1e-300), unif());
                    (-2.0 * a.ln()).sqrt() * (std::f64::consts::TAU * b).cos()
                })
                .collect();
            let nv = v.iter().map(|x| x * x).sum::<f64>().sqrt().max(1e-300);
            v.iter_mut().for_each(|x| *x /= nv);
            let rho = rmax * unif();
            let t = (rho / (2.0 * rr)).tanh(); // Poincaré norm / R
            match model {
                Model::Poincare => (0..d).for_each(|j| out[[i, j]] = rr * t * v[j]),
                Model::Klein => {
                    let s = 2.0 * t / (1.0 + t * t);
                    (0..d).for_each(|j| out[[i, j]] = rr * s * v[j])
                }
                Model::Hyperboloid => {
                    let sh = (rho / rr).sinh();
                    (0..d).for_each(|j| out[[i, j + 1]] = rr * sh * v[j]);
                    out[[i, 0]] = rr * (1.0 + sh * sh).sqrt();
                }
                Model::HalfSpace => {
                    // any point with positive last coordinate
                    (0..d - 1).for_each(|j| out[[i, j]] = rr * (4.0 * unif() - 2.0));
                    out[[i, d - 1]] = rr * (rho - rmax / 2.0).exp();
                }
            }
        }
        out
    }

    fn prep(model: Model, k: Curvature, x: &Array2<f64>) -> Prepared {
        let v: ArrayViewD<f64> = x.view().into_dyn();
        Prepared::new(model, k, "x", &Data::F64(v)).unwrap()
    }

    /// Brute force over all pairs with the same pair function (common
    /// practice): sort every row by (distance, index).
    fn brute(x: &Prepared, q: &Prepared, self_query: bool) -> Vec<Vec<(f64, usize)>> {
        (0..q.n)
            .map(|i| {
                let mut row: Vec<(f64, usize)> =
                    (0..x.n).filter(|&j| !(self_query && j == i)).map(|j| (q.distance(i, x, j), j)).collect();
                row.sort_by(key_cmp);
                row
            })
            .collect()
    }

    fn check_knn(tree: &VpTree, x: &Prepared, q: Option<&Prepared>, k: usize) {
        let (idx, dist) = tree.query(q, k).unwrap();
        let bf = brute(x, q.unwrap_or(x), q.is_none());
        for (i, row) in bf.iter().enumerate() {
            for t in 0..k {
                assert_eq!(idx[i * k + t], row[t].1 as i64, "row {i} rank {t}");
                assert_eq!(dist[i * k + t].to_bits(), row[t].0.to_bits(), "row {i} rank {t}");
            }
        }
    }

    const MODELS: [Model; 4] = [Model::Poincare, Model::Klein, Model::Hyperboloid, Model::HalfSpace];

    #[test]
    fn knn_matches_brute_force_in_every_model() {
        for (mi, &model) in MODELS.iter().enumerate() {
            for (ci, kc) in [-1.0, -0.3, -7.0].into_iter().enumerate() {
                let c = Curvature::new(kc).unwrap();
                let d = if mi % 2 == 0 { 2 } else { 3 };
                let xa = points(model, &c, 700, d, 8.0 * c.radius, (mi * 10 + ci) as u64);
                let ya = points(model, &c, 90, d, 8.0 * c.radius, 99 + (mi * 10 + ci) as u64);
                let x = prep(model, c, &xa);
                let y = prep(model, c, &ya);
                for leaf in [1, 5, DEFAULT_LEAF_SIZE] {
                    let tree = VpTree::from_prepared(&x, leaf, "x").unwrap();
                    for k in [1, 7, 40] {
                        check_knn(&tree, &x, None, k);
                        check_knn(&tree, &x, Some(&y), k);
                    }
                }
            }
        }
    }

    #[test]
    fn k_up_to_the_number_of_candidates() {
        let c = Curvature::default();
        let x = prep(Model::Poincare, c, &points(Model::Poincare, &c, 50, 2, 6.0, 3));
        let tree = VpTree::from_prepared(&x, 4, "x").unwrap();
        check_knn(&tree, &x, None, 49);
        check_knn(&tree, &x, Some(&x), 50);
        assert!(tree.query(None, 50).is_err());
        assert!(tree.query(Some(&x), 51).is_err());
        assert!(tree.query(None, 0).is_err());
    }

    #[test]
    fn ties_go_to_the_lower_index() {
        // 30 copies of 3 distinct points, interleaved: every query has
        // many neighbours at distance exactly 0.
        let c = Curvature::default();
        let base = [[0.1, 0.2], [-0.5, 0.3], [0.9, -0.1]];
        let mut xa = Array2::zeros((90, 2));
        for i in 0..90 {
            xa[[i, 0]] = base[i % 3][0];
            xa[[i, 1]] = base[i % 3][1];
        }
        let x = prep(Model::Poincare, c, &xa);
        for leaf in [1, 3, 16] {
            let tree = VpTree::from_prepared(&x, leaf, "x").unwrap();
            for k in [1, 5, 29, 30, 31, 60, 89] {
                check_knn(&tree, &x, None, k);
            }
            let (idx, dist) = tree.query(None, 5).unwrap();
            assert_eq!(&idx[..5], &[3, 6, 9, 12, 15]);
            assert!(dist[..5].iter().all(|&d| d == 0.0));
        }
    }

    #[test]
    fn radius_matches_brute_force() {
        for &model in &MODELS {
            let c = Curvature::new(-2.5).unwrap();
            let x = prep(model, c, &points(model, &c, 600, 2, 7.0 * c.radius, 5));
            let y = prep(model, c, &points(model, &c, 60, 2, 7.0 * c.radius, 6));
            let tree = VpTree::from_prepared(&x, 8, "x").unwrap();
            for r in [0.0, 0.05, 0.4, 2.0, f64::INFINITY] {
                for q in [None, Some(&y)] {
                    let res = tree.query_radius(q, r).unwrap();
                    let bf = brute(&x, q.unwrap_or(&x), q.is_none());
                    for (i, row) in bf.iter().enumerate() {
                        let want: Vec<&(f64, usize)> = row.iter().filter(|e| e.0 <= r).collect();
                        let (a, b) = (res.indptr[i] as usize, res.indptr[i + 1] as usize);
                        assert_eq!(b - a, want.len(), "row {i} r {r}");
                        for (t, e) in want.iter().enumerate() {
                            assert_eq!(res.indices[a + t], e.1 as i64);
                            assert_eq!(res.distances[a + t].to_bits(), e.0.to_bits());
                        }
                    }
                }
            }
            assert!(tree.query_radius(None, -1.0).is_err());
            assert!(tree.query_radius(None, f64::NAN).is_err());
        }
    }

    #[test]
    fn reported_distance_is_the_prepared_distance() {
        let c = Curvature::new(-0.7).unwrap();
        for &model in &MODELS {
            let x = prep(model, c, &points(model, &c, 40, 3, 9.0, 11));
            let tree = VpTree::from_prepared(&x, 16, "x").unwrap();
            for i in 0..40 {
                for j in 0..40 {
                    let h = x.half_delta(i, &x, j);
                    assert_eq!(tree.dist_from_h(&x, h).to_bits(), x.distance(i, &x, j).to_bits());
                }
            }
        }
    }

    #[test]
    fn tree_is_balanced_and_nodes_cover_their_points() {
        let c = Curvature::default();
        let n = 5000;
        let x = prep(Model::Poincare, c, &points(Model::Poincare, &c, n, 2, 8.0, 21));
        let tree = VpTree::from_prepared(&x, 10, "x").unwrap();
        let mut perm = tree.perm.clone();
        perm.sort_unstable();
        assert_eq!(perm, (0..n).collect::<Vec<_>>());
        for (i, nd) in tree.nodes.iter().enumerate() {
            if nd.is_leaf() {
                assert!(nd.end - nd.start <= 10);
                continue;
            }
            let v = tree.perm[nd.start];
            let mid = tree.nodes[nd.outside].start;
            let (ins, outs) = (mid - nd.start - 1, nd.end - mid);
            assert!(ins + 1 >= outs && outs >= ins, "node {i}: {ins} vs {outs}");
            for pos in nd.start + 1..nd.end {
                let d = x.distance(v, &x, tree.perm[pos]);
                let (lo, hi) = if pos < mid { (nd.bounds[0], nd.bounds[1]) } else { (nd.bounds[2], nd.bounds[3]) };
                assert!(lo <= d && d <= hi);
            }
            assert!(nd.bounds[1] <= nd.bounds[2] * (1.0 + 1e-14), "median split");
        }
    }

    #[test]
    fn deterministic_and_independent_of_threads() {
        let c = Curvature::default();
        let x = prep(Model::Poincare, c, &points(Model::Poincare, &c, 40_000, 2, 8.0, 8));
        let a = VpTree::from_prepared(&x, 16, "x").unwrap();
        let pool = rayon::ThreadPoolBuilder::new().num_threads(1).build().unwrap();
        let b = pool.install(|| VpTree::from_prepared(&x, 16, "x").unwrap());
        assert_eq!(a.perm, b.perm);
        assert_eq!(a.nodes, b.nodes);
        let ra = a.query(None, 5).unwrap();
        let rb = pool.install(|| b.query(None, 5).unwrap());
        assert_eq!(ra, rb);
    }

    #[test]
    fn state_round_trip_and_corruption() {
        let c = Curvature::new(-2.0).unwrap();
        let x = prep(Model::Klein, c, &points(Model::Klein, &c, 300, 3, 5.0, 4));
        let t = VpTree::from_prepared(&x, 7, "x").unwrap();
        let (co, au, pe, ints, bo) = t.to_parts();
        let u = VpTree::from_parts(Model::Klein, c, 7, 6, co.clone(), au.clone(), &pe, &ints, &bo).unwrap();
        assert_eq!(t.query(None, 6).unwrap(), u.query(None, 6).unwrap());
        let mut p2 = pe.clone();
        p2[3] = p2[4];
        assert!(VpTree::from_parts(Model::Klein, c, 7, 6, co.clone(), au.clone(), &p2, &ints, &bo).is_err());
        let mut i2 = ints.clone();
        i2[2] = 5000;
        assert!(VpTree::from_parts(Model::Klein, c, 7, 6, co.clone(), au.clone(), &pe, &i2, &bo).is_err());
        let mut i3 = ints.clone();
        i3[4] += 1;
        assert!(VpTree::from_parts(Model::Klein, c, 7, 6, co.clone(), au.clone(), &pe, &i3, &bo).is_err());
        assert!(VpTree::from_parts(Model::Klein, c, 7, 2, co.clone(), au.clone(), &pe, &ints, &bo).is_err());
        assert!(VpTree::from_parts(Model::Klein, c, 7, 6, co, au, &pe, &ints[3..], &bo[4..]).is_err());
    }

    #[test]
    fn index_methods_agree_bit_for_bit() {
        for &model in &MODELS {
            for d in [2usize, 5] {
                let c = Curvature::new(-1.3).unwrap();
                let base = points(model, &c, 400, d, 8.0 * c.radius, 40 + d as u64);
                // 40 exact duplicates: ties at distance 0
                let xa = ndarray::concatenate![ndarray::Axis(0), base.view(), base.slice(ndarray::s![..40, ..])];
                let x = prep(model, c, &xa);
                let y = prep(model, c, &points(model, &c, 30, d, 8.0 * c.radius, 77));
                let t = Index::from_prepared(x.clone(), 6, Method::Tree, "x").unwrap();
                let b = Index::from_prepared(x.clone(), 6, Method::Brute, "x").unwrap();
                let a = Index::from_prepared(x.clone(), 6, Method::Auto, "x").unwrap();
                assert_eq!((t.method(), b.method()), (Method::Tree, Method::Brute));
                assert!(a.visited > 0.0 && a.visited <= 1.0);
                for q in [None, Some(&y)] {
                    for k in [1, 10, 37] {
                        let want = t.query(q, k).unwrap();
                        assert_eq!(b.query(q, k).unwrap(), want, "{model:?} d {d} k {k}");
                        assert_eq!(a.query(q, k).unwrap(), want);
                    }
                    for r in [0.0, 0.4, 3.0, f64::INFINITY] {
                        assert_eq!(b.query_radius(q, r).unwrap(), t.query_radius(q, r).unwrap());
                    }
                    let (dt, db) = (t.distances(q).unwrap(), b.distances(q).unwrap());
                    assert!(dt.iter().zip(&db).all(|(u, v)| u.to_bits() == v.to_bits()));
                    // the same refusals in the same words
                    let n = x.n + usize::from(q.is_some());
                    assert_eq!(t.query(q, n).unwrap_err().to_string(), b.query(q, n).unwrap_err().to_string());
                    assert_eq!(t.query(q, 0).unwrap_err().to_string(), b.query(q, 0).unwrap_err().to_string());
                    let e = (t.query_radius(q, -1.0).unwrap_err(), b.query_radius(q, f64::NAN).unwrap_err());
                    assert!(e.0.to_string().starts_with("r must be") && e.1.to_string().starts_with("r must be"));
                }
            }
        }
    }

    #[test]
    fn auto_keeps_the_tree_only_where_it_prunes() {
        let c = Curvature::default();
        let low = prep(Model::Poincare, c, &points(Model::Poincare, &c, 20_000, 2, 8.0, 1));
        let a = Index::from_prepared(low.clone(), DEFAULT_LEAF_SIZE, Method::Auto, "x").unwrap();
        assert_eq!(a.method(), Method::Tree);
        assert!(a.visited <= AUTO_MAX_VISITED);
        let high = prep(Model::Poincare, c, &points(Model::Poincare, &c, 3000, 8, 8.0, 2));
        let b = Index::from_prepared(high.clone(), DEFAULT_LEAF_SIZE, Method::Auto, "x").unwrap();
        assert_eq!(b.method(), Method::Brute);
        assert!(b.visited > AUTO_MAX_VISITED);
        // The estimate is a count: the same for the same data, and capped.
        let t = VpTree::from_prepared(&high, DEFAULT_LEAF_SIZE, "x").unwrap();
        assert_eq!(t.visited_fraction(10, 64, 1.0), t.visited_fraction(10, 64, 1.0));
        assert!(t.visited_fraction(10, 64, 0.01) <= 0.01);
        assert!(t.visited_fraction(10, 64, 1.0) > 0.3);
        // The first look settles the high-dimensional case on a subset
        // (and leaves the plane to the full measure).
        let many = prep(Model::Poincare, c, &points(Model::Poincare, &c, 3 * PRECHECK_N, 10, 8.0, 4));
        assert!(first_look(&many, DEFAULT_LEAF_SIZE, "x").unwrap().unwrap() >= PRECHECK_HOPELESS);
        assert_eq!(first_look(&low, DEFAULT_LEAF_SIZE, "x").unwrap(), None);
        assert_eq!(first_look(&high, DEFAULT_LEAF_SIZE, "x").unwrap(), None); // n <= PRECHECK_N
                                                                              // nothing to search among a single point: brute force
        let one = prep(Model::Poincare, c, &Array2::zeros((1, 2)));
        assert_eq!(Index::from_prepared(one, 4, Method::Auto, "x").unwrap().method(), Method::Brute);
        assert!(Method::parse("kd").is_err() && Method::parse("auto") == Ok(Method::Auto));
        assert!(Index::from_prepared(low, 0, Method::Brute, "x").is_err());
    }

    #[test]
    fn bad_input() {
        let c = Curvature::default();
        let xa = Array2::from_shape_vec((3, 2), vec![0.1, 0.2, 0.5, f64::NAN, 0.0, 0.0]).unwrap();
        let e = VpTree::new(Model::Poincare, c, "x", &Data::F64(xa.view().into_dyn()), 16).unwrap_err();
        assert!(e.to_string().contains("x: row 1"), "{e}");
        let xa = Array2::from_shape_vec((2, 2), vec![0.1, 0.2, 0.8, 0.7]).unwrap();
        let e = VpTree::new(Model::Poincare, c, "x", &Data::F64(xa.view().into_dyn()), 16).unwrap_err();
        assert!(e.to_string().contains("x: row 1"), "{e}");
        let xa = Array2::<f64>::zeros((0, 2));
        assert!(VpTree::new(Model::Poincare, c, "x", &Data::F64(xa.view().into_dyn()), 16).is_err());
        let xa = Array2::<f64>::zeros((4, 2));
        assert!(VpTree::new(Model::Poincare, c, "x", &Data::F64(xa.view().into_dyn()), 0).is_err());
        let t = VpTree::new(Model::Poincare, c, "x", &Data::F64(xa.view().into_dyn()), 16).unwrap();
        let ya = Array2::<f64>::zeros((4, 3));
        let e = t.prepare_queries(&Data::F64(ya.view().into_dyn())).unwrap_err();
        assert!(e.to_string().contains("y"), "{e}");
        let ya = Array2::<f64>::zeros((0, 2));
        let q = t.prepare_queries(&Data::F64(ya.view().into_dyn())).unwrap();
        let (i, d) = t.query(Some(&q), 3).unwrap();
        assert!(i.is_empty() && d.is_empty());
        assert_eq!(t.query_radius(Some(&q), 1.0).unwrap().indptr, vec![0]);
    }
}
