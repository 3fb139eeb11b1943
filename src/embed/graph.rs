//! Learned embeddings of graphs: Riemannian SGD on the ranking loss of
//! Nickel & Kiela, "Poincaré Embeddings for Learning Hierarchical
//! Representations" (NeurIPS 2017), in the Poincaré ball, and of their
//! hyperboloid variant ("Learning Continuous Hierarchies in the Lorentz Model
//! of Hyperbolic Geometry", ICML 2018).
//!
//! **Loss.** For each positive pair `(u, v)` (each edge in both directions,
//! or as given for a directed graph: [`Graph::new`]) and
//! `negatives` nodes `v'_j` drawn uniformly, with replacement, among the
//! nodes not adjacent to `u` (in either direction; for a directed graph, not
//! a target of `u`) and not `u` itself:
//! `L = -log(exp(-d(u, v)) / sum_{w in {v, v'_1, ...}} exp(-d(u, w)))`,
//! distances in the metric of the given curvature. The sampling is exact:
//! the `k`-th non-neighbour is found by a binary search in the sorted list of
//! `u`'s excluded nodes (no rejection, one random number per negative), so a
//! node adjacent to almost everything costs the same as any other.
//!
//! **Riemannian SGD.** Every pair distance is evaluated as the pairwise
//! module does (`pair_h` on the model's pair space: the Poincaré
//! coordinates, or the hyperboloid's Poincaré images in double-double with
//! the law-of-cosines form for close far pairs), so the loss sees the
//! distances `gk.distance` reports, bit for bit. The Euclidean gradient is
//! taken with respect to the Poincaré (hub) coordinates `p`, where
//! `d = R acosh(1 + 2h)`, `h = kappa |p - q|^2 a_p a_q`, `a = 1/g`:
//! `dd/dp = 2 sqrt(kappa)/sqrt(h (1 + h)) (a_p a_q (p - q) + h a_p p)`.
//! The Riemannian gradient is the inverse metric times it, `(g^2/4) dd/dp`
//! (the ball's metric is `(2/g)^2 |dp|^2`); on the hyperboloid that tangent
//! is pushed forward through `x_s = 2p/g`:
//! `v_s = (g/2) G + kappa (p.G) p`. The step is the model's exact
//! exponential map (`poincare::exp_map_g`, which returns the exact gap of its
//! result; the hyperboloid's ideal-endpoint form), never a retraction
//! followed by a projection. A Poincaré step whose exact end lies beyond
//! what float64 holds (gap below 2^-53, about 37 R from the origin) is
//! halved until it does not (the rim rule of `models::ball` decides, from
//! the exact gap); such steps are counted ([`Trainer::shortened`]). The
//! hyperboloid holds points out to `|x_s|^2 <= 2^500`.
//!
//! **Short Poincaré steps** (the common case) take the exponential map's
//! closed form in float64 (`fast_poincare_step`: the Möbius addition of the
//! base point and the tangent's image) instead of the double-double form:
//! the result's exact gap is then computed from its rounded coordinates, as
//! for every stored point, and the result is kept only when that gap is at
//! least 2^-26 (nothing then depends on more than float64 resolves: the
//! gap's relative error is below 2^-27); otherwise the double-double map is
//! taken. On the WordNet nouns subset below `animal` (4017 nodes) this cut
//! the CPU time per epoch from 0.23 s to 0.175 s (single thread; the second
//! figure from a build without link-time optimisation).
//!
//! **Short hyperboloid steps** take the same form in the hub: the record's
//! Poincaré image `p` (with its gap) is stepped by `fast_poincare_step` with
//! the ball's Riemannian gradient (the same intrinsic tangent: the two
//! models are isometric through the hub), the result's exact gap is
//! computed from its rounded coordinates, and when it is at least
//! [`FAST_MIN_GAP`] (about 19 R from the origin) the hyperboloid image
//! `(R (2 - g)/g, 2p/g)` of that point is stored like any other point;
//! otherwise the hyperboloid's own exponential map (`exp_spatial`) is taken.
//! The hyperboloid map forms the part of the tangent across `x_s` from
//! error-free 2x2 minors (O(d^2) double-double operations) whenever the
//! tangent is within 1e-8 of radial, which the pushed-forward gradient of a
//! far point (`v_s = (g/2) G + kappa (p.G) p`, `g` ~ 1e-6) nearly always is:
//! on all WordNet nouns (one 10-negative epoch from 40 trained epochs, one
//! thread) the short form cut the epoch from 27.0 s to 10.5 s (Poincaré
//! 5.9-7.5 s).
//!
//! Because both models take exact exponential maps of the same intrinsic
//! gradient from the same start (the hyperboloid starts at the images of
//! the Poincaré starting points), the two trajectories agree up to rounding.
//!
//! **Parallel scheme: batch-synchronous, deterministic.** An epoch visits the
//! edges in an order shuffled by xoshiro256** (seeded once). Batches of
//! `batch_size` positives are processed in three phases: (A) every positive
//! of the batch, in fixed chunks run on all cores, draws its negatives from
//! its own SplitMix64 stream keyed by `(seed, epoch, position)` and writes the
//! Euclidean gradient of its loss into its own slots (`u`, `v`, each
//! negative), reading the points of the previous batch; (B) the slots are
//! grouped by node in slot order (a counting sort); (C) every touched node,
//! in fixed chunks on all cores, sums its slots in that order and takes one
//! exponential-map step. No result depends on the number of threads or on
//! how a caller splits the epoch into calls ([`Trainer::run`] only stops on
//! batch boundaries). The cost against lock-free (Hogwild) updates: a node
//! touched several times within a batch sees one summed step from the same
//! old point instead of a sequence of steps (on WordNet nouns, the hub
//! nodes near the root), the sequential grouping (B) and the copy back of
//! the new points (together about 5-7% of the CPU time in a single-thread
//! profile on WordNet at batch 256). Staleness limits the batch: on WordNet
//! (d = 10, 10 negatives, rate 0.3) the mean loss after 4 epochs was 0.45
//! at batch 256, but 3.2 and 4.9 at 4096 and 16 384, where the summed steps
//! of hub nodes overshoot. `benches/bench_graph.py --batch-size 1` is the
//! sequential reference.
//!
//! **Burn-in.** The first `burn_in` epochs run at `learning_rate *
//! burn_in_factor` (Nickel & Kiela 2017, section 4: a reduced rate for the
//! first epochs while the points near the origin find their directions).
//! After it the rate stays constant, or decays linearly
//! ([`Params::decay_epochs`]).
//!
//! **Radial line search** ([`Params::radial_search`], off by default): after
//! every epoch from the end of burn-in on, all hyperbolic radii are scaled
//! by the common factor that minimises the loss of a fixed-size sample
//! ([`Trainer::radial_step`]). On a hierarchy's closure SGD grows the radii
//! only slowly while the loss still falls along that one direction; the
//! search takes that step at once. The sample is drawn from its own stream
//! keyed by the seed and the epoch, and its loss is summed over fixed
//! chunks in order: no result depends on the thread count.
//!
//! **Per-node mean** ([`Params::node_mean`]): a node touched by `c` slots of
//! a batch steps by the mean of their gradients instead of the sum, so no
//! node moves more than one positive's step per batch. On a hierarchy's
//! closure this bounds the steps of the nodes near the root (which take part
//! in a large share of the positives) and lets batch and rate grow; on the
//! `animal` subset (60 epochs, d = 10, rate 0.3, one thread) it traded mean
//! average precision for mean rank and speed: batch 1024 with the mean, MAP
//! 0.780, mean rank 13.7, 6.7 CPU s; batch 256 summed, MAP 0.828, mean rank
//! 20.9, about 9 CPU s. Summed steps at batch 2048 stalled (loss 0.26 against
//! 0.18).
//!
//! The random generators are this module's own (xoshiro256** and SplitMix64,
//! the authors' reference algorithms), so that the sequence for a seed is
//! fixed here whatever happens to other modules' generators.

use rayon::prelude::*;

use crate::batch::Data;
use crate::error::{row_error, value_err, Error, Result};
use crate::models::ball::{checked_gap, settle, Curvature};
use crate::models::hyperboloid::{self, MAX_SPATIAL_SQ};
use crate::models::points::PointArray;
use crate::models::{poincare, Model};
use crate::numeric::simd::{dispatch, has_fma, prefetch};
use crate::numeric::{acosh1p2_fast, gap, sumsq};
use crate::pairwise::matrix::knn;
use crate::pairwise::{pair_h, pair_scale, read_pair_point, seq_dist_sq, PairSpace, Prepared};

/// Positives per task in the gradient phase (fixed: results never depend on
/// the thread count).
const EDGE_CHUNK: usize = 16;
/// Nodes per task in the update phase.
const NODE_CHUNK: usize = 128;
/// A slot without a node (no non-neighbour to draw).
const NONE: u32 = u32::MAX;
/// Largest number of halvings of one step at the rim.
const MAX_HALVINGS: usize = 64;
/// Marks a staged draw whose node is already known (a weighted draw).
const FOUND: usize = usize::MAX - 1;
/// Pairs (positives times `1 + negatives`) in the sample of a radial line
/// search ([`Trainer::radial_step`]), its golden-section iterations (the
/// bracket of `ln f`, 0.81 wide, shrinks to about 4e-4), the stream key of
/// its sample, and the largest radius (units of R) it moves a point to:
/// Poincaré points stay 7 R inside the float64 rim (about 37 R), the
/// hyperboloid well inside its range (`|x_s|^2 <= 2^500`, about 173 R).
const RADIAL_PAIRS: usize = 1 << 16;
const RADIAL_ITERATIONS: usize = 16;
const RADIAL_KEY: u64 = 0x5241_4449_414c_0001;
const RADIAL_MAX_POINCARE: f64 = 30.0;
const RADIAL_MAX_HYPERBOLOID: f64 = 150.0;

// ------------------------------------------------------------------ random

// The generator of the starting points and the per-epoch shuffles is the
// library's xoshiro256** seeded by SplitMix64 (`numeric::rng`).
use crate::numeric::rng::{splitmix64, unit_f64, Rng};

/// The stream of one positive: SplitMix64 started from a hash of
/// `(seed, epoch, position in the epoch)`, so that its negatives do not
/// depend on which thread, chunk or call handles it.
struct Stream(u64);

impl Stream {
    #[inline(always)]
    fn new(seed: u64, epoch: u64, pos: u64) -> Stream {
        let mut st = seed ^ epoch.wrapping_mul(0xd1b5_4a32_d192_ed03);
        let a = splitmix64(&mut st);
        let mut st2 = a ^ pos.wrapping_mul(0xaef1_7502_108e_f2d9);
        Stream(splitmix64(&mut st2))
    }

    /// Uniform in `0..m` by multiply-shift (bias below `m / 2^64`).
    #[inline(always)]
    fn below(&mut self, m: u64) -> u64 {
        ((u128::from(splitmix64(&mut self.0)) * u128::from(m)) >> 64) as u64
    }

    /// Uniform in `[0, 1)`, a multiple of 2^-53.
    #[inline(always)]
    fn uniform(&mut self) -> f64 {
        unit_f64(splitmix64(&mut self.0))
    }
}

// ------------------------------------------------------------------- graph

/// The positive pairs and, per node, the sorted list of nodes excluded as
/// its negatives (its neighbours in either direction, or its targets for a
/// directed graph, and itself).
#[derive(Clone, Debug)]
pub struct Graph {
    pub n: usize,
    /// Whether the rows were taken as given (else both directions).
    pub directed: bool,
    pub edges: Vec<[u32; 2]>,
    excl_off: Vec<usize>,
    excl: Vec<u32>,
    /// Per node, the keys `S[b B] - b B` of the blocks of [`BLOCK`] entries
    /// of its sorted excluded list `S` (`top[top_off[u]..top_off[u + 1]]`):
    /// the first level of the two-level search in
    /// [`Graph::kth_non_neighbour`].
    top_off: Vec<usize>,
    top: Vec<u32>,
}

/// Entries per block of an excluded list (64 `u32` = four cache lines): the
/// search for the `k`-th non-neighbour first bisects the block keys (small,
/// and cache-resident for the nodes drawn most, the hubs of a hierarchy),
/// then one block. A plain bisection of a hub's list (tens of thousands of
/// entries) took about 16 cache misses per draw: a third of the CPU time of
/// an epoch on WordNet nouns (perf, one thread).
const BLOCK: usize = 64;

impl Graph {
    /// Validates `edges` (rows `(u, v)`, node ids in `0..n`) and builds the
    /// exclusion lists. Errors name the row. Undirected: the positives are
    /// each row in both directions, `(u, v)` and `(v, u)` (all rows first,
    /// then all reversed), and `u`'s negatives exclude its neighbours in
    /// either direction. `directed`: the positives are the rows as given and
    /// `u`'s negatives exclude only its targets, `{v : (u, v) a row}`, so a
    /// node pointing at `u` can be drawn (Nickel & Kiela 2017, section 3:
    /// `N(u) = {v' : (u, v') not in D}`).
    pub fn new(n: usize, edges: &[[i64; 2]], directed: bool) -> Result<Graph> {
        if edges.is_empty() {
            return value_err("edges is empty: at least one edge (a row (u, v)) is needed");
        }
        if n == 0 || n >= NONE as usize {
            return value_err(format!("n_nodes must be between 1 and {}, got {n}", NONE - 1));
        }
        let mut out = Vec::with_capacity(edges.len());
        let mut deg = vec![1usize; n]; // the node itself
        for (i, &[u, v]) in edges.iter().enumerate() {
            for x in [u, v] {
                if x < 0 || x as u64 >= n as u64 {
                    return value_err(format!(
                        "edges: row {i} ({u}, {v}) has node id {x} out of range (ids run from 0 to n_nodes - 1 = {})",
                        n - 1
                    ));
                }
            }
            if u == v {
                return value_err(format!("edges: row {i} ({u}, {v}) is a self-loop"));
            }
            let (u, v) = (u as usize, v as usize);
            deg[u] += 1;
            if !directed {
                deg[v] += 1;
            }
            out.push([u as u32, v as u32]);
        }
        let mut off = vec![0usize; n + 1];
        for i in 0..n {
            off[i + 1] = off[i] + deg[i];
        }
        let mut excl = vec![0u32; off[n]];
        let mut cur: Vec<usize> = off[..n].to_vec();
        let mut put = |a: usize, b: u32| {
            excl[cur[a]] = b;
            cur[a] += 1;
        };
        for i in 0..n {
            put(i, i as u32);
        }
        for &[u, v] in &out {
            put(u as usize, v);
            if !directed {
                put(v as usize, u);
            }
        }
        // Sort and deduplicate each list, compacting in place.
        let mut w = 0usize;
        let mut new_off = vec![0usize; n + 1];
        for i in 0..n {
            let (a, b) = (off[i], off[i + 1]);
            excl[a..b].sort_unstable();
            let start = w;
            for j in a..b {
                if j == a || excl[j] != excl[j - 1] {
                    excl[w] = excl[j];
                    w += 1;
                }
            }
            new_off[i] = start;
            new_off[i + 1] = w;
        }
        excl.truncate(w);
        if !directed {
            let m = out.len();
            for i in 0..m {
                let [u, v] = out[i];
                out.push([v, u]);
            }
        }
        let mut top_off = vec![0usize; n + 1];
        let mut top = Vec::with_capacity(w / BLOCK + n);
        for i in 0..n {
            let l = &excl[new_off[i]..new_off[i + 1]];
            for b in (0..l.len()).step_by(BLOCK) {
                top.push(l[b] - b as u32);
            }
            top_off[i + 1] = top.len();
        }
        Ok(Graph { n, directed, edges: out, excl_off: new_off, excl, top_off, top })
    }

    /// Nodes excluded as negatives of `u` (sorted; `u` included).
    pub fn excluded(&self, u: usize) -> &[u32] {
        &self.excl[self.excl_off[u]..self.excl_off[u + 1]]
    }

    /// Number of admissible negatives of `u`.
    #[inline(always)]
    pub fn non_neighbours(&self, u: usize) -> usize {
        self.n - (self.excl_off[u + 1] - self.excl_off[u])
    }

    /// The `k`-th (from 0, increasing ids) node not excluded for `u`
    /// (`k < non_neighbours(u)`): with `S` the sorted excluded list, the
    /// answer is `k + j` for `j = #{i : S[i] - i <= k}` (`S[i] - i` is
    /// non-decreasing), found by bisecting the block keys, then one block
    /// ([`Graph::locate`], [`Graph::finish`]).
    #[inline(always)]
    pub fn kth_non_neighbour(&self, u: usize, k: usize) -> u32 {
        self.finish(u, k, self.locate(u, k))
    }

    /// First stage of [`Graph::kth_non_neighbour`]: the index in `S` of the
    /// block holding the answer's count, or `usize::MAX` when no entry of
    /// `S` counts (the answer is `k`). Reads only the block keys, so a
    /// caller drawing many nodes can prefetch the blocks ([`Graph::block`])
    /// before finishing.
    #[inline(always)]
    pub fn locate(&self, u: usize, k: usize) -> usize {
        let keys = &self.top[self.top_off[u]..self.top_off[u + 1]];
        let b = keys.partition_point(|&key| key as usize <= k);
        if b == 0 {
            usize::MAX
        } else {
            (b - 1) * BLOCK
        }
    }

    /// Address of the middle of the block found by [`Graph::locate`] (for a
    /// prefetch).
    #[inline(always)]
    pub fn block(&self, u: usize, lo: usize) -> *const u32 {
        let s = self.excluded(u);
        s[(lo + BLOCK / 2).min(s.len() - 1)..].as_ptr()
    }

    /// Second stage of [`Graph::kth_non_neighbour`].
    #[inline(always)]
    pub fn finish(&self, u: usize, k: usize, lo: usize) -> u32 {
        if lo == usize::MAX {
            return k as u32;
        }
        let s = self.excluded(u);
        let j = partition_point_idx(s, lo, (lo + BLOCK).min(s.len()), k);
        (k + j) as u32
    }
}

/// Number of `i < hi` with `s[i] - i <= k`, given that every `i < lo`
/// satisfies it (`s` sorted and distinct, so `s[i] - i` is non-decreasing).
#[inline(always)]
fn partition_point_idx(s: &[u32], lo: usize, hi: usize, k: usize) -> usize {
    let (mut lo, mut hi) = (lo, hi);
    while lo < hi {
        let mid = (lo + hi) / 2;
        if (s[mid] as usize) - mid <= k {
            lo = mid + 1;
        } else {
            hi = mid;
        }
    }
    lo
}

// ----------------------------------------------------- weighted negatives

/// Draws of nodes with probability proportional to `c^power`, `c` the
/// node's number of positives (each undirected edge counts at both ends; a
/// directed row at both its nodes), by Walker's alias method (Walker 1977;
/// the table built by Vose's stable procedure, Vose 1991): one index and one
/// uniform per draw. A draw excluded for `u` is rejected (a binary search in
/// `u`'s excluded list) and drawn again, up to [`MAX_REJECTIONS`] times, then
/// one uniform admissible node is taken instead. On a hierarchy's closure
/// the excluded nodes of a leaf are its ancestors, the heaviest nodes of
/// all: on the WordNet nouns 14% of the draws are rejected (mean over the
/// positives), and for the nodes near the root, excluded with most of the
/// weight, the uniform fallback is the rule (8.6% of the positives have a
/// rejection probability above one half).
#[derive(Clone, Debug)]
pub struct DegreeSampler {
    prob: Vec<f64>,
    alias: Vec<u32>,
}

/// Draws rejected before [`DegreeSampler`] falls back to a uniform node.
const MAX_REJECTIONS: usize = 32;

impl DegreeSampler {
    pub fn new(graph: &Graph, power: f64) -> DegreeSampler {
        let n = graph.n;
        let mut count = vec![0u64; n];
        for &[u, v] in &graph.edges {
            count[u as usize] += 1;
            if graph.directed {
                count[v as usize] += 1;
            }
        }
        let w: Vec<f64> = count.iter().map(|&c| if c == 0 { 0.0 } else { (c as f64).powf(power) }).collect();
        let total: f64 = w.iter().sum();
        let mut prob: Vec<f64> = w.iter().map(|x| x * (n as f64 / total)).collect();
        let mut alias: Vec<u32> = (0..n as u32).collect();
        let (mut small, mut large): (Vec<usize>, Vec<usize>) = (0..n).partition(|&i| prob[i] < 1.0);
        while let (Some(&s), Some(&l)) = (small.last(), large.last()) {
            small.pop();
            alias[s] = l as u32;
            prob[l] -= 1.0 - prob[s];
            if prob[l] < 1.0 {
                large.pop();
                small.push(l);
            }
        }
        // What is left has probability 1 up to rounding.
        for i in large.into_iter().chain(small) {
            prob[i] = 1.0;
        }
        DegreeSampler { prob, alias }
    }

    /// One node with probability proportional to its weight.
    #[inline(always)]
    fn draw(&self, st: &mut Stream) -> u32 {
        let i = st.below(self.prob.len() as u64) as usize;
        if st.uniform() < self.prob[i] {
            i as u32
        } else {
            self.alias[i]
        }
    }

    /// A weighted draw among `u`'s admissible negatives (`c > 0` of them).
    #[inline(always)]
    fn draw_for(&self, graph: &Graph, u: usize, c: usize, st: &mut Stream) -> u32 {
        let ex = graph.excluded(u);
        for _ in 0..MAX_REJECTIONS {
            let w = self.draw(st);
            if ex.binary_search(&w).is_err() {
                return w;
            }
        }
        graph.kth_non_neighbour(u, st.below(c as u64) as usize)
    }
}

// ------------------------------------------------------------------ params

/// Training parameters (validated by [`Params::check`]).
#[derive(Clone, Debug)]
pub struct Params {
    /// Dimension of the ball (the hyperboloid has `dim + 1` coordinates).
    pub dim: usize,
    /// Negatives per positive.
    pub negatives: usize,
    /// Riemannian SGD step per positive (the loss is summed over a batch).
    pub learning_rate: f64,
    /// Epochs at the reduced rate.
    pub burn_in: usize,
    /// The rate during burn-in is `learning_rate * burn_in_factor`.
    pub burn_in_factor: f64,
    /// Positives per synchronous step.
    pub batch_size: usize,
    /// Starting points (unless given to [`Trainer::new`]) uniform in
    /// `[-init_scale, init_scale]^dim` (units of R) in the Poincaré ball.
    pub init_scale: f64,
    pub seed: u64,
    /// How a node touched by several slots of a batch moves: `false` by the
    /// sum of their gradients (the step sequential SGD would take from one
    /// point), `true` by their mean (at most one positive's step per batch,
    /// whatever the node's degree).
    pub node_mean: bool,
    /// During the first `degree_epochs` epochs the negatives are drawn
    /// with probability proportional to `c^degree_power`, `c` the node's
    /// number of positives (its degree), among `u`'s admissible negatives
    /// ([`DegreeSampler`]); afterwards uniformly. `0`: uniform throughout.
    pub degree_epochs: usize,
    pub degree_power: f64,
    /// `0`: a constant rate after burn-in. Otherwise the rate after burn-in
    /// falls linearly with the positives done, from `learning_rate` at the
    /// end of burn-in to `learning_rate * MIN_RATE_FRACTION` at the end of
    /// epoch `decay_epochs`, and stays there.
    pub decay_epochs: usize,
    /// After every epoch from the end of burn-in on, scale all hyperbolic
    /// radii (distances to the origin) by the common factor that minimises
    /// the loss on a sample ([`Trainer::radial_step`]).
    pub radial_search: bool,
    /// Negatives per positive `(u, v)` drawn from `u`'s list of nearest
    /// non-neighbours in the current embedding; `0`: none. The lists hold
    /// the `hard_pool` nearest admissible nodes among `u`'s `2 hard_pool`
    /// nearest, recomputed by an exact k-nearest-neighbour search at the
    /// start of every `hard_every`-th epoch after burn-in. A drawn `w` is
    /// kept only if it violates the ranking of the positive, i.e. is
    /// currently closer to `u` than `v` is (`h(u, w) < h(u, v)`, `pair_h` as
    /// in the loss); otherwise that slot takes the ordinary draw (uniform,
    /// or degree-weighted during the degree epochs) from the same stream.
    /// (Keeping every pool draw, the nearest non-neighbours, measured worse:
    /// they include a node's siblings, which belong near it.)
    pub hard_negatives: usize,
    pub hard_pool: usize,
    pub hard_every: usize,
}

/// The floor of the linearly decaying rate, as a fraction of
/// `learning_rate` (common practice in linearly decayed SGD: a small
/// positive floor rather than zero).
pub const MIN_RATE_FRACTION: f64 = 1e-2;

impl Default for Params {
    fn default() -> Self {
        Params {
            dim: 10,
            negatives: 10,
            learning_rate: 0.3,
            burn_in: 10,
            burn_in_factor: 0.1,
            batch_size: 256,
            init_scale: 1e-3,
            seed: 0,
            node_mean: false,
            degree_epochs: 0,
            degree_power: 0.75,
            decay_epochs: 0,
            radial_search: false,
            hard_negatives: 0,
            hard_pool: 128,
            hard_every: 5,
        }
    }
}

impl Params {
    pub fn check(&self) -> Result<()> {
        if self.dim < 1 {
            return value_err(format!("dim must be >= 1, got {}", self.dim));
        }
        if self.negatives < 1 || self.negatives > 1 << 20 {
            return value_err(format!("negatives must be between 1 and 2^20, got {}", self.negatives));
        }
        if !self.learning_rate.is_finite() || self.learning_rate <= 0.0 {
            return value_err(format!("learning_rate must be a finite positive number, got {}", self.learning_rate));
        }
        if !self.burn_in_factor.is_finite() || self.burn_in_factor <= 0.0 {
            return value_err(format!("burn_in_factor must be a finite positive number, got {}", self.burn_in_factor));
        }
        if self.batch_size < 1 || self.batch_size > 1 << 24 {
            return value_err(format!("batch_size must be between 1 and 2^24, got {}", self.batch_size));
        }
        if self.decay_epochs != 0 && self.decay_epochs <= self.burn_in {
            return value_err(format!(
                "decay_epochs must be 0 (a constant rate) or more than burn_in = {}, got {}",
                self.burn_in, self.decay_epochs
            ));
        }
        if !(self.degree_power.is_finite() && (0.0..=4.0).contains(&self.degree_power)) {
            return value_err(format!("degree_power must lie in [0, 4], got {}", self.degree_power));
        }
        if self.hard_negatives > self.negatives {
            return value_err(format!(
                "hard_negatives must be at most negatives = {}, got {}",
                self.negatives, self.hard_negatives
            ));
        }
        if self.hard_pool < 1 || self.hard_pool > 1 << 12 {
            return value_err(format!("hard_pool must be between 1 and 4096, got {}", self.hard_pool));
        }
        if self.hard_every < 1 {
            return value_err(format!("hard_every must be >= 1, got {}", self.hard_every));
        }
        if !(self.init_scale.is_finite() && self.init_scale > 0.0 && self.init_scale <= 0.5) {
            return value_err(format!("init_scale must lie in (0, 0.5] (units of R), got {}", self.init_scale));
        }
        Ok(())
    }
}

// ----------------------------------------------------------------- records

/// How a node is stored: `[p (dim) | refinement data | a | g]`, where `p`
/// and the refinement data are the pair-space point written by
/// `read_pair_point` (for the hyperboloid, the refinement data end with the
/// spatial part and `x0/R`: the point itself), `a = 1/g`, and `g` the gap of
/// `p` (the exact gap of the stored Poincaré coordinates).
#[derive(Clone, Copy, Debug)]
struct Layout {
    model: Model,
    space: PairSpace,
    dim: usize,
    ew: usize,
}

impl Layout {
    fn new(model: Model, dim: usize) -> Layout {
        let space = PairSpace::of(model);
        Layout { model, space, dim, ew: space.extra_width(dim) }
    }
    #[inline(always)]
    fn width(&self) -> usize {
        self.dim + self.ew + 2
    }
    /// `(p, refinement data, a, g)` of a record.
    #[inline(always)]
    fn view<'a>(&self, r: &'a [f64]) -> (&'a [f64], &'a [f64], f64, f64) {
        let (d, e) = (self.dim, self.ew);
        (&r[..d], &r[d..d + e], r[d + e], r[d + e + 1])
    }
    /// Writes the record of a point given in model coordinates.
    #[inline(always)]
    fn store(&self, k: &Curvature, point: &[f64], r: &mut [f64]) -> std::result::Result<(), crate::error::Fault> {
        let (d, e) = (self.dim, self.ew);
        let (hi, rest) = r.split_at_mut(d);
        let (extra, tail) = rest.split_at_mut(e);
        if self.model == Model::Poincare {
            // the pair space is the point itself, `a = 1/g` (as `read_pair_point`)
            let g = checked_gap(k, point)?.value();
            hi.copy_from_slice(point);
            tail[0] = 1.0 / g;
            tail[1] = g;
        } else {
            let a = read_pair_point(self.model, k, point, hi, extra)?;
            tail[0] = a;
            tail[1] = 1.0 / a;
        }
        Ok(())
    }
    /// The point in model coordinates.
    fn point(&self, k: &Curvature, r: &[f64], out: &mut [f64]) {
        let (p, extra, _, _) = self.view(r);
        if self.model == Model::Hyperboloid {
            let d = self.dim;
            out[0] = k.radius * extra[2 * d];
            out[1..].copy_from_slice(&extra[d..2 * d]);
        } else {
            out.copy_from_slice(p);
        }
    }
}

/// What the per-positive kernel needs.
struct Ctx<'a> {
    lay: Layout,
    k: Curvature,
    /// `pair_scale` of the model.
    s: f64,
    rec: &'a [f64],
}

impl<'a> Ctx<'a> {
    #[inline(always)]
    fn node(&self, i: u32) -> (&'a [f64], &'a [f64], f64, f64) {
        let w = self.lay.width();
        let i = i as usize;
        self.lay.view(&self.rec[i * w..(i + 1) * w])
    }
    /// `h = sinh(d/2)^2` of nodes `a`, `b`, as the loss computes it.
    #[inline(always)]
    fn pair_h(&self, a: u32, b: u32) -> f64 {
        let (pa, ea, aa, _) = self.node(a);
        let (pb, eb, ab, _) = self.node(b);
        pair_h(self.lay.space, &self.k, self.s, seq_dist_sq(pa, pb), (pa, ea, aa), (pb, eb, ab))
    }
    /// Prefetches node `i`'s record (its first and last cache lines).
    #[inline(always)]
    fn prefetch_node(&self, i: u32) {
        let w = self.lay.width();
        let r = &self.rec[i as usize * w..(i as usize + 1) * w];
        prefetch(r.as_ptr());
        prefetch(r[w - 1..].as_ptr());
    }
}

/// Loss of one positive `(nodes[0], nodes[1])` against the negatives
/// `nodes[2..]` (`NONE` slots skipped), and the Euclidean gradients with
/// respect to the pair-space (Poincaré hub) coordinates, one per slot in
/// `grads` (`nodes.len() * dim`). `work` holds `2 nodes.len()` values.
#[inline(always)]
fn positive_grads(ctx: &Ctx, nodes: &[u32], grads: &mut [f64], work: &mut [f64]) -> f64 {
    let k = &ctx.k;
    let dim = ctx.lay.dim;
    let ns = nodes.len();
    let (hs, ds) = work.split_at_mut(ns);
    let (pu, eu, au, _) = ctx.node(nodes[0]);
    let mut dmin = f64::INFINITY;
    for t in 1..ns {
        if nodes[t] == NONE {
            continue;
        }
        let (pt, et, at, _) = ctx.node(nodes[t]);
        let h = pair_h(ctx.lay.space, k, ctx.s, seq_dist_sq(pu, pt), (pu, eu, au), (pt, et, at));
        hs[t] = h;
        ds[t] = k.radius * acosh1p2_fast(h);
        dmin = dmin.min(ds[t]);
    }
    let mut z = 0.0;
    for t in 1..ns {
        if nodes[t] != NONE {
            ds[t] = (-(ds[t] - dmin)).exp();
            z += ds[t];
        }
    }
    // -log(e^{-d_v} / sum e^{-d_w}) = (d_v - dmin) + ln(sum e^{-(d_w - dmin)})
    let loss = -ds[1].ln() + z.ln();
    let (gu, rest) = grads.split_at_mut(dim);
    gu.iter_mut().for_each(|g| *g = 0.0);
    let mut su = 0.0;
    let two_sk = 2.0 * k.sqrt_kappa;
    for t in 1..ns {
        let gt = &mut rest[(t - 1) * dim..t * dim];
        if nodes[t] == NONE {
            continue;
        }
        let (pt, _, at, _) = ctx.node(nodes[t]);
        let h = hs[t];
        // dL/dd_t = [t is the positive] - softmax_t
        let c = if t == 1 { 1.0 } else { 0.0 } - ds[t] / z;
        if h > 0.0 && c != 0.0 {
            let q = c * two_sk / (h * (1.0 + h)).sqrt();
            let ca = q * (au * at);
            let ct = q * h * at;
            for i in 0..dim {
                let diff = pu[i] - pt[i];
                gu[i] += ca * diff;
                gt[i] = ct * pt[i] - ca * diff;
            }
            su += q * h * au;
        } else {
            gt.iter_mut().for_each(|g| *g = 0.0);
        }
    }
    for i in 0..dim {
        gu[i] += su * pu[i];
    }
    loss
}

/// `h = sinh(d/2)^2` of two points at hyperbolic radii `a`, `b` (units of
/// R; `sa = sinh a`, `sb = sinh b`) whose directions from the origin are
/// the unit vectors `u_a`, `u_b`, with `q = |u_a - u_b|^2 / 4`: the
/// hyperbolic law of cosines `cosh d = cosh a cosh b - sinh a sinh b cos t`
/// (Beardon, "The Geometry of Discrete Groups", section 7.12) rewritten
/// without cancellation as `cosh d = cosh(a - b) + sinh a sinh b (1 - cos t)`,
/// `1 - cos t = 2 q`: `h = sinh((a - b)/2)^2 + sinh a sinh b q`.
#[inline(always)]
fn radial_h(a: f64, b: f64, sa: f64, sb: f64, q: f64) -> f64 {
    let s = (0.5 * (a - b)).sinh();
    s * s + sa * sb * q
}

/// The Riemannian gradient in model coordinates from the Euclidean hub
/// gradient `gr` of a node: `(g^2/4) G` in the ball; on the hyperboloid the
/// tangent `(v0, v_s)` with `v_s = (g/2) G + kappa (p.G) p`,
/// `v0 = x_s.v_s/x0` (tangency).
fn riemannian(lay: &Layout, k: &Curvature, r: &[f64], gr: &[f64], out: &mut [f64]) {
    let (p, extra, _, g) = lay.view(r);
    if lay.model == Model::Hyperboloid {
        let d = lay.dim;
        let pg: f64 = p.iter().zip(gr).map(|(a, b)| a * b).sum();
        for i in 0..d {
            out[1 + i] = 0.5 * g * gr[i] + k.kappa * pg * p[i];
        }
        let xs = &extra[d..2 * d];
        let x0 = k.radius * extra[2 * d];
        out[0] = xs.iter().zip(&out[1..]).map(|(a, b)| a * b).sum::<f64>() / x0;
    } else {
        let f = 0.25 * g * g;
        for i in 0..lay.dim {
            out[i] = f * gr[i];
        }
    }
}

/// One Riemannian SGD step of a node with summed Euclidean hub gradient
/// `gr`: writes the new record into `out` and returns the number of
/// halvings the step needed at the rim (0 almost always). `tmp` holds
/// `3 dim + 1` values.
#[inline(always)]
fn step(lay: &Layout, k: &Curvature, r: &[f64], gr: &[f64], lr: f64, out: &mut [f64], tmp: &mut [f64]) -> usize {
    let d = lay.dim;
    let (p, extra, _, g) = lay.view(r);
    let (v, y) = tmp.split_at_mut(d);
    let (ys, y) = y.split_at_mut(d);
    // Short steps, both models: the ball's closed form from the hub point
    // (on the hyperboloid the record's Poincaré image, an isometry away),
    // kept when the exact gap of the rounded result is at least
    // FAST_MIN_GAP; the hyperboloid stores the image of that point.
    let f = -lr * 0.25 * g * g;
    for i in 0..d {
        v[i] = f * gr[i];
    }
    if fast_poincare_step(k, p, g, v, ys) {
        let kept = if lay.model == Model::Hyperboloid {
            match checked_gap(k, ys) {
                Ok(gy) if gy.value() >= FAST_MIN_GAP => {
                    hyperboloid::from_poincare(k, ys, gy.value(), y);
                    lay.store(k, y, out).is_ok()
                }
                _ => false,
            }
        } else {
            lay.store(k, ys, out).is_ok() && out[d + lay.ew + 1] >= FAST_MIN_GAP
        };
        if kept {
            return 0;
        }
    }
    if lay.model == Model::Hyperboloid {
        let pg: f64 = p.iter().zip(gr).map(|(a, b)| a * b).sum();
        for i in 0..d {
            v[i] = -lr * (0.5 * g * gr[i] + k.kappa * pg * p[i]);
        }
        let (xs, cx) = (&extra[d..2 * d], extra[2 * d]);
        for halvings in 0..MAX_HALVINGS {
            if v.iter().all(|x| x.is_finite()) {
                hyperboloid::exp_spatial(k, xs, cx, v, ys);
                if ys.iter().all(|x| x.is_finite()) && sumsq(ys) <= MAX_SPATIAL_SQ {
                    hyperboloid::write_point(k, ys, y);
                    if lay.store(k, y, out).is_ok() {
                        return halvings;
                    }
                }
            }
            v.iter_mut().for_each(|x| *x *= 0.5);
        }
    } else {
        for halvings in 0..MAX_HALVINGS {
            if v.iter().all(|x| x.is_finite()) {
                let gy = poincare::exp_map_g(k, p, g, v, ys);
                // The rim rule judges the exact gap of the result: held (moved
                // to the last radius inside only if its last rounding fell
                // on the sphere), or beyond float64 and the step is halved.
                if settle(k, ys, gy, false) && lay.store(k, ys, out).is_ok() {
                    return halvings;
                }
            }
            v.iter_mut().for_each(|x| *x *= 0.5);
        }
    }
    // No representable step (a non-finite gradient): the node stays.
    out.copy_from_slice(r);
    MAX_HALVINGS
}

/// Largest `sqrt(kappa) |v| / g` (half the step's length in units of R)
/// taken by [`fast_poincare_step`].
const FAST_MAX_HALF_STEP: f64 = 0.5;
/// Smallest exact gap of a result kept from [`fast_poincare_step`]: the
/// float64 form's relative error in the gap is about `2^-53 / g`, so below
/// this the exact (double-double) exponential map is taken instead.
const FAST_MIN_GAP: f64 = 1.0 / 67_108_864.0; // 2^-26

/// The Poincaré exponential map by its closed form in float64, for short
/// steps: `exp_x(v) = x (+) u`, `u = tanh(sqrt(kappa)|v|/g) v / (sqrt(kappa)
/// |v|)` (the Möbius addition of curvature `-kappa`; Ungar, "A Gyrovector
/// Space Approach to Hyperbolic Geometry", 2009, eq. (2.105) with `λ_x =
/// 2/g`), `x (+) u = ((1 + 2 kappa x.u + kappa |u|^2) x + g u) / (1 + 2 kappa
/// x.u + (1 - g) kappa |u|^2)` with `g = 1 - kappa |x|^2` the stored exact
/// gap. With `|u| sqrt(kappa) <= tanh(1/2)` the denominator is at least
/// `(1 - tanh(1/2))^2`, so nothing cancels; the caller recomputes the exact
/// gap of the rounded result (`Layout::store`, which rejects a point on or
/// beyond the sphere) and keeps it only when that gap is at least
/// [`FAST_MIN_GAP`]; otherwise, and for longer or tiny steps (returns
/// `false`), it takes the double-double exponential map. The same
/// operations in the same order on every thread: results stay independent
/// of the thread count.
#[inline(always)]
fn fast_poincare_step(k: &Curvature, x: &[f64], g: f64, v: &[f64], out: &mut [f64]) -> bool {
    let nv2 = sumsq(v);
    // (tiny tangents, whose squares lose digits, go to the exact map)
    if !(nv2 > 1e-200 && nv2.is_finite()) {
        return false;
    }
    let snv = k.sqrt_kappa * nv2.sqrt();
    let a = snv / g;
    if !(a <= FAST_MAX_HALF_STEP) {
        return false;
    }
    let t = a.tanh() / snv;
    let mut xu = 0.0;
    let mut uu = 0.0;
    for i in 0..x.len() {
        let u = t * v[i];
        out[i] = u;
        xu += x[i] * u;
        uu += u * u;
    }
    let (kxu, kuu) = (k.kappa * xu, k.kappa * uu);
    let cx = 1.0 + 2.0 * kxu + kuu;
    let den = 1.0 + 2.0 * kxu + (1.0 - g) * kuu;
    for i in 0..x.len() {
        out[i] = (cx * x[i] + g * out[i]) / den;
    }
    true
}

// ----------------------------------------------------------------- trainer

/// The node records (`ptr`, `len` values) shared by the tasks of a batch's
/// step phase, each writing the records of its own nodes.
#[derive(Clone, Copy)]
struct Records(*mut f64, usize);

// Only `Trainer::batch` makes one, for its step phase, whose tasks write
// disjoint records (see there).
unsafe impl Send for Records {}
unsafe impl Sync for Records {}

impl Records {
    /// Record `node` of width `w`.
    ///
    /// # Safety
    /// No other reference to that record may exist while it is in use.
    #[inline(always)]
    #[allow(clippy::mut_from_ref)]
    unsafe fn row(&self, node: usize, w: usize) -> &mut [f64] {
        assert!((node + 1) * w <= self.1, "record out of range");
        std::slice::from_raw_parts_mut(self.0.add(node * w), w)
    }
}

/// What one call of [`Trainer::run`] did.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct RunResult {
    /// Positives processed.
    pub edges: usize,
    /// The mean loss of the epoch when this call finished one.
    pub epoch_loss: Option<f64>,
}

/// The state of a training run; [`Trainer::run`] advances it batch by batch.
pub struct Trainer {
    lay: Layout,
    k: Curvature,
    p: Params,
    graph: Graph,
    rec: Vec<f64>,
    /// The positives, shuffled in place at the start of every epoch (read in
    /// sequence, not through an index).
    order: Vec<[u32; 2]>,
    rng: Rng,
    epoch: usize,
    pos: usize,
    loss_sum: f64,
    losses: Vec<f64>,
    shortened: u64,
    // scratch of the batch phases
    slot_node: Vec<u32>,
    slot_grad: Vec<f64>,
    mark: Vec<u32>,
    local: Vec<u32>,
    serial: u32,
    touched: Vec<u32>,
    offs: Vec<u32>,
    list: Vec<u32>,
    /// The weighted draws of the first `degree_epochs` epochs.
    degree: Option<DegreeSampler>,
    /// The radial factor applied after each epoch (1 where none was).
    scales: Vec<f64>,
    /// Each node's nearest non-neighbours (CSR: `hard_off`, `hard_ids`),
    /// empty until the first refresh.
    hard_off: Vec<u32>,
    hard_ids: Vec<u32>,
}

impl Trainer {
    /// Starts a run from `start` (points of `model`, `(n, width)`, read and
    /// checked row by row like every point input: argument name `init`), or
    /// when it is `None` from points uniform in `[-init_scale R,
    /// init_scale R]^dim` in the Poincaré ball (their images on the
    /// hyperboloid). The draws of the training do not depend on which (the
    /// uniform draws are skipped over when `start` is given), so a run from
    /// the points of an `epochs = 0` run repeats the run from scratch.
    pub fn new(model: Model, k: Curvature, graph: Graph, p: Params, start: Option<&Data>) -> Result<Trainer> {
        p.check()?;
        if !matches!(model, Model::Poincare | Model::Hyperboloid) {
            return value_err(format!(
                "model must be 'poincare' or 'hyperboloid' for learned embeddings, got {:?} (convert the result with gyrokit.convert)",
                Model::NAMES[model as usize]
            ));
        }
        let lay = Layout::new(model, p.dim);
        let n = graph.n;
        let w = lay.width();
        let mut rec = vec![0.0; n * w];
        let mut rng = Rng::new(p.seed);
        if let Some(data) = start {
            let pa = PointArray::new(model, "init", data)?;
            if pa.n != n || pa.d != p.dim {
                return value_err(format!(
                    "init must have shape (n_nodes, width) = ({n}, {}) for {} points of dim {}; got ({}, {})",
                    model.width(p.dim),
                    Model::NAMES[model as usize],
                    p.dim,
                    pa.n,
                    pa.width
                ));
            }
            const CHUNK: usize = 4096;
            let parts: Vec<&mut [f64]> = rec.chunks_mut(CHUNK * w).collect();
            pa.read_rows(CHUNK, parts, |part, r, row| lay.store(&k, row, &mut part[r * w..(r + 1) * w]))?;
            for _ in 0..n * p.dim {
                rng.uniform();
            }
        } else {
            let mut x = vec![0.0; p.dim];
            let mut pt = vec![0.0; p.dim + 1];
            for i in 0..n {
                for c in x.iter_mut() {
                    *c = (2.0 * rng.uniform() - 1.0) * p.init_scale * k.radius;
                }
                if model == Model::Hyperboloid {
                    hyperboloid::from_poincare(&k, &x, gap(k.kappa, &x), &mut pt);
                    lay.store(&k, &pt, &mut rec[i * w..(i + 1) * w])
                } else {
                    lay.store(&k, &x, &mut rec[i * w..(i + 1) * w])
                }
                .map_err(|_| Error::Value("starting point outside the model".into()))?;
            }
        }
        let order = graph.edges.clone();
        let degree = (p.degree_epochs > 0).then(|| DegreeSampler::new(&graph, p.degree_power));
        Ok(Trainer {
            lay,
            k,
            graph,
            rec,
            order,
            rng,
            epoch: 0,
            pos: 0,
            loss_sum: 0.0,
            losses: Vec::new(),
            shortened: 0,
            slot_node: Vec::new(),
            slot_grad: Vec::new(),
            mark: vec![0; n],
            local: vec![0; n],
            serial: 0,
            touched: Vec::new(),
            offs: Vec::new(),
            list: Vec::new(),
            degree,
            scales: Vec::new(),
            hard_off: Vec::new(),
            hard_ids: Vec::new(),
            p,
        })
    }

    /// Completed epochs.
    pub fn epoch(&self) -> usize {
        self.epoch
    }
    /// Positives processed in the current epoch.
    pub fn position(&self) -> usize {
        self.pos
    }
    /// Number of edges (positives per epoch).
    pub fn n_edges(&self) -> usize {
        self.graph.edges.len()
    }
    /// The mean loss of every completed epoch.
    pub fn losses(&self) -> &[f64] {
        &self.losses
    }
    /// Steps halved at the rim so far.
    pub fn shortened(&self) -> u64 {
        self.shortened
    }
    /// Coordinates per point in the model.
    pub fn width(&self) -> usize {
        self.lay.model.width(self.lay.dim)
    }

    /// The points, `(n, width)` row-major, in model coordinates.
    pub fn points(&self) -> Vec<f64> {
        let (w, ow) = (self.lay.width(), self.width());
        let mut out = vec![0.0; self.graph.n * ow];
        for (r, o) in self.rec.chunks_exact(w).zip(out.chunks_exact_mut(ow)) {
            self.lay.point(&self.k, r, o);
        }
        out
    }

    /// Runs whole batches until at least `max_edges` positives are done or
    /// the epoch ends (a batch is never split, so the result does not depend
    /// on how the epoch is divided into calls).
    pub fn run(&mut self, max_edges: usize) -> RunResult {
        let m = self.graph.edges.len();
        let mut done = 0;
        if self.pos == 0 {
            let p = &self.p;
            if p.hard_negatives > 0 && self.epoch >= p.burn_in && (self.epoch - p.burn_in) % p.hard_every == 0 {
                self.refresh_hard();
            }
            // Fisher-Yates shuffle of the epoch's order.
            for i in (1..m).rev() {
                let j = self.rng.below(i as u64 + 1) as usize;
                self.order.swap(i, j);
            }
            self.loss_sum = 0.0;
        }
        while done < max_edges.max(1) && self.pos < m {
            let end = (self.pos + self.p.batch_size).min(m);
            self.loss_sum += self.batch(self.pos, end);
            done += end - self.pos;
            self.pos = end;
        }
        let mut epoch_loss = None;
        if self.pos == m {
            let l = self.loss_sum / m as f64;
            self.losses.push(l);
            epoch_loss = Some(l);
            self.epoch += 1;
            self.pos = 0;
            if self.p.radial_search && self.epoch > self.p.burn_in {
                let f = self.radial_step();
                self.scales.push(f);
            }
        }
        RunResult { edges: done, epoch_loss }
    }

    /// The radial factors applied so far (one per epoch after burn-in).
    pub fn scales(&self) -> &[f64] {
        &self.scales
    }

    /// The radial line search ([`Params::radial_search`]): every point's
    /// hyperbolic radius `rho` (distance to the origin, units of R) becomes
    /// `f rho`, its direction kept, with `f` in `[2/3, 3/2]` minimising the
    /// mean loss of a sample of positives (about [`RADIAL_PAIRS`] pairs; the
    /// positives drawn uniformly, each with `negatives` uniform
    /// non-neighbours, from a stream keyed by the seed and the epoch) by a
    /// golden-section search on `ln f`. The factor is applied only if it
    /// lowers the sample's loss below its value at `f = 1`; it is capped so
    /// that every point stays where the model holds it exactly (Poincaré:
    /// radius at most [`RADIAL_MAX_POINCARE`]). Returns the factor (1 if
    /// none). The pair distances at any `f` come from the hyperbolic law of
    /// cosines, `cosh d = cosh(a - b) + sinh a sinh b (1 - cos t)`, written
    /// as `h = sinh(d/2)^2 = sinh((a - b)/2)^2 + sinh a sinh b |u_a - u_b|^2
    /// / 4` for radii `a`, `b` and unit directions `u` (no cancellation).
    /// Why: on a hierarchy's closure the loss keeps improving along this
    /// one direction long after the angles have settled (WordNet nouns,
    /// d = 10, after 20 epochs: the sample loss falls from 0.338 at f = 1 to
    /// 0.323 at f = 1.3), which SGD follows only slowly.
    pub fn radial_step(&mut self) -> f64 {
        let n = self.graph.n;
        let m = self.graph.edges.len();
        let d = self.lay.dim;
        let w = self.width();
        // radii and directions of every node
        let pts = self.points();
        let kk = self.k;
        let mut rho = vec![0.0; n];
        let mut dir = vec![0.0; n * d];
        for i in 0..n {
            let (r, u) = (&mut rho[i], &mut dir[i * d..(i + 1) * d]);
            let x = &pts[i * w..(i + 1) * w];
            let (xs, s) = if self.lay.model == Model::Hyperboloid {
                (&x[1..], sumsq(&x[1..]).sqrt() / kk.radius)
            } else {
                (x, sumsq(x).sqrt() / kk.radius)
            };
            if s == 0.0 {
                continue;
            }
            *r = if self.lay.model == Model::Hyperboloid {
                s.asinh()
            } else {
                // 2 artanh t = 2 ln(1 + t) - ln(1 - t^2), the gap exact
                let g = gap(kk.kappa, x);
                2.0 * s.ln_1p() - g.ln()
            };
            let inv = 1.0 / (s * kk.radius);
            for (o, v) in u.iter_mut().zip(xs) {
                *o = v * inv;
            }
        }
        // the sample: (node a, node b, |u_a - u_b|^2 / 4) per pair, kslots per positive
        let kslots = 1 + self.p.negatives;
        let np = (RADIAL_PAIRS / kslots).clamp(1, m);
        let mut st = Stream::new(self.p.seed ^ RADIAL_KEY, self.epoch as u64, 0);
        let mut pairs: Vec<(u32, u32, f64)> = Vec::with_capacity(np * kslots);
        let q4 = |a: usize, b: usize| {
            let (ua, ub) = (&dir[a * d..(a + 1) * d], &dir[b * d..(b + 1) * d]);
            0.25 * ua.iter().zip(ub).map(|(x, y)| (x - y) * (x - y)).sum::<f64>()
        };
        for _ in 0..np {
            let [u, v] = self.graph.edges[st.below(m as u64) as usize];
            let c = self.graph.non_neighbours(u as usize);
            if c == 0 {
                continue;
            }
            pairs.push((u, v, q4(u as usize, v as usize)));
            for _ in 0..self.p.negatives {
                let x = self.graph.kth_non_neighbour(u as usize, st.below(c as u64) as usize);
                pairs.push((u, x, q4(u as usize, x as usize)));
            }
        }
        if pairs.is_empty() {
            return 1.0;
        }
        let radius = kk.radius;
        let mut sh = vec![0.0; n];
        let mut loss = |f: f64| -> f64 {
            sh.par_iter_mut().zip(&rho).for_each(|(s, &r)| *s = (f * r).sinh());
            let sh = &sh;
            let parts: Vec<f64> = pairs
                .par_chunks(kslots * 64)
                .map(|ch| {
                    let mut tot = 0.0;
                    let mut dd = vec![0.0; kslots];
                    for pos in ch.chunks_exact(kslots) {
                        let mut dmin = f64::INFINITY;
                        for (o, &(a, b, q)) in dd.iter_mut().zip(pos) {
                            let (a, b) = (a as usize, b as usize);
                            *o = radius * acosh1p2_fast(radial_h(f * rho[a], f * rho[b], sh[a], sh[b], q));
                            dmin = dmin.min(*o);
                        }
                        let z: f64 = dd.iter().map(|&x| (-(x - dmin)).exp()).sum();
                        tot += (dd[0] - dmin) + z.ln();
                    }
                    tot
                })
                .collect();
            parts.iter().sum::<f64>()
        };
        let rmax = rho.iter().fold(0.0f64, |a, &b| a.max(b));
        let cap = match self.lay.model {
            Model::Hyperboloid => RADIAL_MAX_HYPERBOLOID,
            _ => RADIAL_MAX_POINCARE,
        };
        let hi = if rmax > 0.0 { (cap / rmax).min(1.5) } else { 1.5 };
        if hi <= 1.0 {
            return 1.0;
        }
        // golden-section search on t = ln f in [ln(2/3), ln hi]
        let (mut lo_t, mut hi_t) = ((2.0f64 / 3.0).ln(), hi.ln());
        let gr = 0.5 * (5.0f64.sqrt() - 1.0);
        let mut x1 = hi_t - gr * (hi_t - lo_t);
        let mut x2 = lo_t + gr * (hi_t - lo_t);
        let (mut f1, mut f2) = (loss(x1.exp()), loss(x2.exp()));
        for _ in 0..RADIAL_ITERATIONS {
            if f1 <= f2 {
                hi_t = x2;
                x2 = x1;
                f2 = f1;
                x1 = hi_t - gr * (hi_t - lo_t);
                f1 = loss(x1.exp());
            } else {
                lo_t = x1;
                x1 = x2;
                f1 = f2;
                x2 = lo_t + gr * (hi_t - lo_t);
                f2 = loss(x2.exp());
            }
        }
        let (t, ft) = if f1 <= f2 { (x1, f1) } else { (x2, f2) };
        let f = t.exp();
        if !(ft < loss(1.0)) {
            return 1.0;
        }
        // apply: rho -> f rho along each direction
        let mut out = vec![0.0; w];
        for i in 0..n {
            if rho[i] == 0.0 {
                continue;
            }
            let r2 = f * rho[i];
            let u = &dir[i * d..(i + 1) * d];
            if self.lay.model == Model::Hyperboloid {
                out[0] = radius * r2.cosh();
                let sh = radius * r2.sinh();
                for (o, v) in out[1..].iter_mut().zip(u) {
                    *o = sh * v;
                }
            } else {
                let t = radius * (0.5 * r2).tanh();
                for (o, v) in out.iter_mut().zip(u) {
                    *o = t * v;
                }
            }
            let rw = self.lay.width();
            if self.lay.store(&kk, &out, &mut self.rec[i * rw..(i + 1) * rw]).is_err() {
                // cannot happen below the caps; the point keeps its place
                continue;
            }
        }
        f
    }

    /// Recomputes every node's list of nearest non-neighbours (see
    /// [`Params::hard_negatives`]): the exact `2 hard_pool` nearest of the
    /// current points (`pairwise::knn`, ascending by distance then index),
    /// the excluded nodes dropped, at most `hard_pool` kept.
    fn refresh_hard(&mut self) {
        let n = self.graph.n;
        let w = self.width();
        let q = (2 * self.p.hard_pool).min(n.saturating_sub(1));
        self.hard_off.clear();
        self.hard_ids.clear();
        self.hard_off.push(0);
        if q == 0 {
            self.hard_off.resize(n + 1, 0);
            return;
        }
        let pts = self.points();
        let view = ndarray::ArrayView2::from_shape((n, w), &pts).expect("(n, width) points").into_dyn();
        let near = Prepared::new(self.lay.model, self.k, "points", &Data::F64(view))
            .and_then(|x| knn(&x, &x, q, true))
            .map(|r| r.0);
        match near {
            Ok(idx) => {
                for u in 0..n {
                    let ex = self.graph.excluded(u);
                    let mut kept = 0;
                    for &j in &idx[u * q..(u + 1) * q] {
                        let j = j as u32;
                        if kept < self.p.hard_pool && ex.binary_search(&j).is_err() {
                            self.hard_ids.push(j);
                            kept += 1;
                        }
                    }
                    self.hard_off.push(self.hard_ids.len() as u32);
                }
            }
            // The trainer's points are always valid: cannot happen; uniform
            // draws then.
            Err(_) => self.hard_off.resize(n + 1, 0),
        }
    }

    /// The rate of the batch starting at position `start` of the current
    /// epoch (see [`Params::decay_epochs`]).
    pub fn rate(&self, start: usize) -> f64 {
        let p = &self.p;
        if self.epoch < p.burn_in {
            return p.learning_rate * p.burn_in_factor;
        }
        if p.decay_epochs == 0 {
            return p.learning_rate;
        }
        let m = self.graph.edges.len() as f64;
        let done = (self.epoch - p.burn_in) as f64 * m + start as f64;
        let total = (p.decay_epochs - p.burn_in) as f64 * m;
        p.learning_rate * (1.0 - done / total).max(MIN_RATE_FRACTION)
    }

    /// One synchronous step over the positives `order[start..end]`; returns
    /// the sum of their losses (fixed-order sum of fixed chunks).
    fn batch(&mut self, start: usize, end: usize) -> f64 {
        let lay = self.lay;
        let dim = lay.dim;
        let kslots = 2 + self.p.negatives;
        let nb = end - start;
        let ns = nb * kslots;
        let lr = self.rate(start);
        if self.slot_node.len() < ns {
            self.slot_node.resize(ns, NONE);
            self.slot_grad.resize(ns * dim, 0.0);
        }
        let fast = has_fma();
        let ctx = Ctx { lay, k: self.k, s: pair_scale(lay.model, &self.k), rec: &self.rec };
        let graph = &self.graph;
        let (seed, epoch) = (self.p.seed, self.epoch as u64);
        let weighted = if self.epoch < self.p.degree_epochs { self.degree.as_ref() } else { None };
        let n_hard = if self.hard_off.is_empty() { 0 } else { self.p.hard_negatives };
        let (hard_off, hard_ids) = (&self.hard_off, &self.hard_ids);
        // (A) gradients of every positive into its own slots
        let chunk_loss: Vec<f64> = self.order[start..end]
            .par_chunks(EDGE_CHUNK)
            .zip(self.slot_node[..ns].par_chunks_mut(EDGE_CHUNK * kslots))
            .zip(self.slot_grad[..ns * dim].par_chunks_mut(EDGE_CHUNK * kslots * dim))
            .enumerate()
            .map(|(ci, ((es, nodes), grads))| {
                dispatch(
                    fast,
                    #[inline(always)]
                    || {
                        let mut work = vec![0.0; 2 * kslots];
                        // Three stages, so that the cache misses of a
                        // chunk's draws and point loads overlap: (1) every
                        // slot's random index and block, prefetched; (2) the
                        // drawn nodes, their records prefetched; (3) the
                        // gradients. Same draws, same order as one by one.
                        let mut kb = vec![(0usize, 0usize); es.len() * kslots];
                        for (j, &[u, v]) in es.iter().enumerate() {
                            let pos = (start + ci * EDGE_CHUNK + j) as u64;
                            let c = graph.non_neighbours(u as usize);
                            let mut st = Stream::new(seed, epoch, pos);
                            ctx.prefetch_node(v);
                            let hard = if n_hard > 0 {
                                &hard_ids[hard_off[u as usize] as usize..hard_off[u as usize + 1] as usize]
                            } else {
                                &[][..]
                            };
                            // h(u, v), computed on the first pool draw
                            let mut h_uv = f64::NAN;
                            for t in 2..kslots {
                                if t - 2 < n_hard && !hard.is_empty() {
                                    let h = hard[st.below(hard.len() as u64) as usize];
                                    if h_uv.is_nan() {
                                        h_uv = ctx.pair_h(u, v);
                                    }
                                    if ctx.pair_h(u, h) < h_uv {
                                        kb[j * kslots + t] = (h as usize, FOUND);
                                        continue;
                                    }
                                }
                                if let (Some(ds), true) = (weighted, c != 0) {
                                    // the node itself, marked as found
                                    kb[j * kslots + t] = (ds.draw_for(graph, u as usize, c, &mut st) as usize, FOUND);
                                } else if c != 0 {
                                    let k = st.below(c as u64) as usize;
                                    let lo = graph.locate(u as usize, k);
                                    if lo != usize::MAX {
                                        prefetch(graph.block(u as usize, lo));
                                    }
                                    kb[j * kslots + t] = (k, lo);
                                }
                            }
                        }
                        for (j, &[u, v]) in es.iter().enumerate() {
                            let nd = &mut nodes[j * kslots..(j + 1) * kslots];
                            nd[0] = u;
                            nd[1] = v;
                            let c = graph.non_neighbours(u as usize);
                            for t in 2..kslots {
                                nd[t] = if c == 0 {
                                    NONE
                                } else {
                                    let (k, lo) = kb[j * kslots + t];
                                    let w = if lo == FOUND { k as u32 } else { graph.finish(u as usize, k, lo) };
                                    ctx.prefetch_node(w);
                                    w
                                };
                            }
                        }
                        let mut loss = 0.0;
                        for j in 0..es.len() {
                            let nd = &nodes[j * kslots..(j + 1) * kslots];
                            let gs = &mut grads[j * kslots * dim..(j + 1) * kslots * dim];
                            loss += positive_grads(&ctx, nd, gs, &mut work);
                        }
                        loss
                    },
                )
            })
            .collect();
        let loss: f64 = chunk_loss.iter().sum();
        // (B) group the slots by node, in slot order (counting sort)
        self.serial = self.serial.wrapping_add(1);
        if self.serial == 0 {
            self.mark.iter_mut().for_each(|m| *m = 0);
            self.serial = 1;
        }
        self.touched.clear();
        self.offs.clear();
        for &node in &self.slot_node[..ns] {
            if node == NONE {
                continue;
            }
            let i = node as usize;
            if self.mark[i] != self.serial {
                self.mark[i] = self.serial;
                self.local[i] = self.touched.len() as u32;
                self.touched.push(node);
                self.offs.push(0);
            }
            self.offs[self.local[i] as usize] += 1;
        }
        // exclusive prefix sums, then place (offs[l] is the start of l's run)
        let mut acc = 0u32;
        for o in self.offs.iter_mut() {
            let c = *o;
            *o = acc;
            acc += c;
        }
        self.offs.push(acc);
        self.list.resize(acc as usize, 0);
        {
            let mut cur: Vec<u32> = self.offs.clone();
            for (s, &node) in self.slot_node[..ns].iter().enumerate() {
                if node == NONE {
                    continue;
                }
                let l = self.local[node as usize] as usize;
                self.list[cur[l] as usize] = s as u32;
                cur[l] += 1;
            }
        }
        // (C) one step per touched node, in place: a node's step reads and
        // writes its own record only, and the touched nodes are distinct
        let w = lay.width();
        let k = self.k;
        let recs = Records(self.rec.as_mut_ptr(), self.rec.len());
        let (touched, offs, list, slot_grad) = (&self.touched, &self.offs, &self.list, &self.slot_grad);
        let node_mean = self.p.node_mean;
        let halvings: usize = touched
            .par_chunks(NODE_CHUNK)
            .enumerate()
            .map(|(ci, nodes)| {
                dispatch(
                    fast,
                    #[inline(always)]
                    || {
                        let mut gsum = vec![0.0; dim];
                        let mut tmp = vec![0.0; 3 * dim + 1];
                        let mut cur = vec![0.0; w];
                        let mut hv = 0;
                        for (j, &node) in nodes.iter().enumerate() {
                            let l = ci * NODE_CHUNK + j;
                            let node = node as usize;
                            // SAFETY: `touched` lists each node once (phase B
                            // numbers first touches), so no two tasks share a
                            // record, and nothing else reads the records until
                            // this phase has joined.
                            let out = unsafe { recs.row(node, w) };
                            cur.copy_from_slice(out);
                            gsum.iter_mut().for_each(|g| *g = 0.0);
                            let slots = &list[offs[l] as usize..offs[l + 1] as usize];
                            for &s in slots {
                                let g = &slot_grad[s as usize * dim..(s as usize + 1) * dim];
                                for i in 0..dim {
                                    gsum[i] += g[i];
                                }
                            }
                            let rate = if node_mean { lr / slots.len() as f64 } else { lr };
                            hv += step(&lay, &k, &cur, &gsum, rate, out, &mut tmp);
                        }
                        hv
                    },
                )
            })
            .sum();
        self.shortened += halvings as u64;
        loss
    }
}

/// The loss of one positive `(u, targets[0])` with the given negatives
/// `targets[1..]`, and the Riemannian gradient of that loss at every node
/// of `[u, targets...]` (rows of `width` values: the ball gradient
/// `(g^2/4) dL/dx`, or the hyperboloid tangent `(v0, v_s)`), computed by the
/// training kernel itself. `points` is `(n, width)` in model coordinates;
/// the nodes must be distinct.
pub fn loss_and_gradient(
    model: Model,
    k: Curvature,
    dim: usize,
    points: &[f64],
    u: usize,
    targets: &[usize],
) -> Result<(f64, Vec<f64>)> {
    let lay = Layout::new(model, dim);
    let ow = model.width(dim);
    let w = lay.width();
    let nodes: Vec<usize> = std::iter::once(u).chain(targets.iter().copied()).collect();
    let n = points.len() / ow;
    if targets.is_empty() {
        return value_err("targets must hold the positive (and any negatives)");
    }
    for (j, &i) in nodes.iter().enumerate() {
        if i >= n {
            return value_err(format!("node {i} out of range"));
        }
        if nodes[..j].contains(&i) {
            return value_err(format!("node {i} repeated"));
        }
    }
    let mut rec = vec![0.0; nodes.len() * w];
    for (j, &i) in nodes.iter().enumerate() {
        lay.store(&k, &points[i * ow..(i + 1) * ow], &mut rec[j * w..(j + 1) * w])
            .map_err(|f| row_error("points", &[n, ow], &[i], f, false))?;
    }
    let ctx = Ctx { lay, k, s: pair_scale(model, &k), rec: &rec };
    let ids: Vec<u32> = (0..nodes.len() as u32).collect();
    let mut grads = vec![0.0; nodes.len() * dim];
    let mut work = vec![0.0; 2 * nodes.len()];
    let loss = positive_grads(&ctx, &ids, &mut grads, &mut work);
    let mut out = vec![0.0; nodes.len() * ow];
    for j in 0..nodes.len() {
        riemannian(&lay, &k, &rec[j * w..(j + 1) * w], &grads[j * dim..(j + 1) * dim], &mut out[j * ow..(j + 1) * ow]);
    }
    Ok((loss, out))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn tree_closure(branch: usize, depth: usize) -> (usize, Vec<[i64; 2]>) {
        // balanced tree, node 0 the root; closure pairs (descendant, ancestor)
        let mut parent = vec![-1i64];
        let mut level = vec![0usize];
        for _ in 0..depth {
            let mut next = Vec::new();
            for &p in &level {
                for _ in 0..branch {
                    parent.push(p as i64);
                    next.push(parent.len() - 1);
                }
            }
            level = next;
        }
        let mut edges = Vec::new();
        for i in 1..parent.len() {
            let mut a = parent[i];
            while a >= 0 {
                edges.push([i as i64, a]);
                a = parent[a as usize];
            }
        }
        (parent.len(), edges)
    }

    #[test]
    fn radial_h_is_the_poincare_distance() {
        // sinh(d/2)^2 = |x - y|^2 / ((1 - |x|^2)(1 - |y|^2)) in the unit
        // ball (Beardon, "The Geometry of Discrete Groups", section 7.2)
        // against the law-of-cosines form from radii and directions
        let mut rng = Rng::new(3);
        for case in 0..2000 {
            let d = 1 + case % 6;
            let mut x: Vec<f64> = (0..d).map(|_| rng.uniform() - 0.5).collect();
            let mut y: Vec<f64> = (0..d).map(|_| rng.uniform() - 0.5).collect();
            if case % 3 == 1 {
                // nearly coincident
                y = x.iter().map(|v| v + 1e-9 * (rng.uniform() - 0.5)).collect();
            }
            // radii up to about 14 (|x| up to 1 - 1e-6)
            let (tx, ty) = (1.0 - 10f64.powf(-6.0 * rng.uniform()), 1.0 - 10f64.powf(-6.0 * rng.uniform()));
            let (nx, ny) = (sumsq(&x).sqrt(), sumsq(&y).sqrt());
            let ty = if case % 3 == 1 { tx * (1.0 + 1e-12 * (rng.uniform() - 0.5)) } else { ty };
            x.iter_mut().for_each(|v| *v *= tx / nx);
            y.iter_mut().for_each(|v| *v *= ty / ny);
            let (gx, gy) = (gap(1.0, &x), gap(1.0, &y));
            let want = seq_dist_sq(&x, &y) / (gx * gy);
            let (nx, ny) = (sumsq(&x).sqrt(), sumsq(&y).sqrt());
            let (rx, ry) = (2.0 * nx.ln_1p() - gx.ln(), 2.0 * ny.ln_1p() - gy.ln());
            let q: f64 = 0.25 * x.iter().zip(&y).map(|(a, b)| (a / nx - b / ny).powi(2)).sum::<f64>();
            let got = radial_h(rx, ry, rx.sinh(), ry.sinh(), q);
            // as distances: the radii and directions taken from rounded
            // coordinates carry their resolution, a few ulps of |x| over the
            // gap (ACCURACY-NOTES: points near the rim)
            let (dg, dw) = (2.0 * got.sqrt().asinh(), 2.0 * want.sqrt().asinh());
            let tol = 1e-13 * (1.0 + dw) + 8.0 * f64::EPSILON * (1.0 / gx + 1.0 / gy);
            assert!((dg - dw).abs() <= tol, "case {case}: {dg} vs {dw}");
        }
    }

    #[test]
    fn radial_search_lowers_the_loss_and_keeps_points_inside() {
        // a balanced tree's closure, after burn-in: the factors applied are
        // finite, in [2/3, 3/2], and the points stay inside the ball
        let (n, edges) = tree_closure(3, 4);
        for model in [Model::Poincare, Model::Hyperboloid] {
            let g = Graph::new(n, &edges, false).unwrap();
            let p = Params { dim: 5, burn_in: 2, batch_size: 16, radial_search: true, seed: 1, ..Params::default() };
            let mut t = Trainer::new(model, Curvature::new(-1.0).unwrap(), g, p, None).unwrap();
            while t.epoch() < 12 {
                t.run(usize::MAX);
            }
            let sc = t.scales();
            assert_eq!(sc.len(), 10);
            assert!(sc.iter().all(|&f| (2.0 / 3.0 - 1e-12..=1.5 + 1e-12).contains(&f)), "{sc:?}");
            assert!(sc.iter().any(|&f| f > 1.01), "{sc:?}");
            let pts = t.points();
            let w = t.width();
            for r in pts.chunks_exact(w) {
                if model == Model::Poincare {
                    assert!(sumsq(r) < 1.0);
                } else {
                    let q = -r[0] * r[0] + sumsq(&r[1..]);
                    assert!((q + 1.0).abs() <= 1e-9 * r[0] * r[0]);
                }
            }
        }
    }

    #[test]
    fn kth_non_neighbour_enumerates_the_complement() {
        // reference: a direct scan of 0..n (common practice)
        let edges = [[0i64, 3], [3, 5], [5, 0], [7, 3], [1, 3]];
        // directed: a node's negatives exclude its targets only (Nickel &
        // Kiela 2017, N(u) = {v' : (u, v') not in D}); undirected: both ways
        assert_eq!(Graph::new(9, &edges, true).unwrap().excluded(3), &[3, 5]);
        assert_eq!(Graph::new(9, &edges, false).unwrap().excluded(3), &[0, 1, 3, 5, 7]);
        let g = Graph::new(9, &edges, true).unwrap();
        for u in 0..9 {
            let ex = g.excluded(u);
            let want: Vec<u32> = (0..9u32).filter(|w| !ex.contains(w)).collect();
            assert_eq!(g.non_neighbours(u), want.len());
            let got: Vec<u32> = (0..want.len()).map(|k| g.kth_non_neighbour(u, k)).collect();
            assert_eq!(got, want, "node {u}");
        }
    }

    #[test]
    fn kth_non_neighbour_on_long_lists() {
        // lists of several blocks (the two-level search): hubs adjacent to
        // many random nodes; reference: a direct scan (common practice)
        let n = 700;
        let mut rng = Rng::new(3);
        let mut edges = Vec::new();
        for (hub, m) in [(0i64, 650usize), (1, 300), (2, 64), (3, 128), (4, 129)] {
            for _ in 0..m {
                let w = rng.below(n as u64) as i64;
                if w != hub {
                    edges.push([hub, w]);
                }
            }
        }
        let g = Graph::new(n, &edges, false).unwrap();
        for u in 0..8 {
            let ex = g.excluded(u);
            let want: Vec<u32> = (0..n as u32).filter(|w| !ex.contains(w)).collect();
            assert_eq!(g.non_neighbours(u), want.len());
            let got: Vec<u32> = (0..want.len()).map(|k| g.kth_non_neighbour(u, k)).collect();
            assert_eq!(got, want, "node {u}");
        }
    }

    #[test]
    fn bad_edges_name_the_row() {
        let e = Graph::new(4, &[[0, 1], [2, 2]], false).unwrap_err().to_string();
        assert!(e.contains("row 1") && e.contains("self-loop"), "{e}");
        let e = Graph::new(4, &[[0, 1], [1, 4]], false).unwrap_err().to_string();
        assert!(e.contains("row 1") && e.contains("out of range"), "{e}");
        let e = Graph::new(4, &[[-1, 1]], false).unwrap_err().to_string();
        assert!(e.contains("row 0"), "{e}");
        assert!(Graph::new(4, &[], false).is_err());
    }

    #[test]
    fn degree_draws_follow_the_weights_and_skip_the_excluded() {
        // A star with a tail: node 0 joined to 1..=5, and 5 - 6 - 7. Counts of
        // positives (undirected: one per edge end): 0 -> 5, 5 -> 2, 6 -> 2,
        // 1..=4 and 7 -> 1.
        let edges = [[0, 1], [0, 2], [0, 3], [0, 4], [0, 5], [5, 6], [6, 7]];
        let g = Graph::new(8, &edges, false).unwrap();
        let counts = [5.0f64, 1.0, 1.0, 1.0, 1.0, 2.0, 2.0, 1.0];
        let power = 0.75;
        let ds = DegreeSampler::new(&g, power);
        let total: f64 = counts.iter().map(|c| c.powf(power)).sum();
        // Unrestricted draws: frequencies against c^power / sum (Walker's
        // alias method is exact; a binomial 5-sigma band, common practice).
        let draws = 400_000;
        let mut st = Stream::new(3, 0, 0);
        let mut hist = [0usize; 8];
        for _ in 0..draws {
            hist[ds.draw(&mut st) as usize] += 1;
        }
        for i in 0..8 {
            let p = counts[i].powf(power) / total;
            let sd = (draws as f64 * p * (1.0 - p)).sqrt();
            assert!(
                (hist[i] as f64 - draws as f64 * p).abs() < 5.0 * sd,
                "node {i}: {} vs {}",
                hist[i],
                draws as f64 * p
            );
        }
        // For u = 6 (excluded: 5, 6, 7) the draws are the weights restricted
        // to {0, 1, 2, 3, 4}, renormalised.
        let mut hist = [0usize; 8];
        let c = g.non_neighbours(6);
        for _ in 0..draws {
            hist[ds.draw_for(&g, 6, c, &mut st) as usize] += 1;
        }
        assert_eq!(hist[5] + hist[6] + hist[7], 0);
        let sub: f64 = counts[..5].iter().map(|c| c.powf(power)).sum();
        for i in 0..5 {
            let p = counts[i].powf(power) / sub;
            let sd = (draws as f64 * p * (1.0 - p)).sqrt();
            assert!((hist[i] as f64 - draws as f64 * p).abs() < 5.0 * sd, "node {i}");
        }
        // Power 0: uniform over the nodes with positives.
        let flat = DegreeSampler::new(&g, 0.0);
        let mut hist = [0usize; 8];
        for _ in 0..80_000 {
            hist[flat.draw(&mut st) as usize] += 1;
        }
        assert!(hist.iter().all(|&h| (h as f64 - 10_000.0).abs() < 500.0), "{hist:?}");
        // A node whose only admissible negative has no positives (weight 0)
        // gets it through the uniform fallback after the rejections.
        let g = Graph::new(5, &[[0, 1], [0, 2], [0, 3]], false).unwrap();
        let ds = DegreeSampler::new(&g, power);
        for _ in 0..100 {
            assert_eq!(ds.draw_for(&g, 0, g.non_neighbours(0), &mut st), 4);
        }
    }

    fn train(model: Model, threads: usize, epochs: usize) -> (Vec<f64>, Vec<f64>) {
        train_with(model, threads, epochs, 0)
    }

    fn train_with(model: Model, threads: usize, epochs: usize, degree_epochs: usize) -> (Vec<f64>, Vec<f64>) {
        run_tree(model, threads, epochs, false, Params { burn_in: 2, seed: 11, degree_epochs, ..small_params() })
    }

    /// The settings of the small-tree runs.
    fn small_params() -> Params {
        Params { dim: 3, negatives: 8, learning_rate: 0.5, batch_size: 7, ..Params::default() }
    }

    /// Points and epoch losses of a run on the closure of a 3-ary tree of
    /// depth 3 with `threads` threads.
    fn run_tree(model: Model, threads: usize, epochs: usize, directed: bool, p: Params) -> (Vec<f64>, Vec<f64>) {
        let (n, edges) = tree_closure(3, 3);
        let g = Graph::new(n, &edges, directed).unwrap();
        let pool = rayon::ThreadPoolBuilder::new().num_threads(threads).build().unwrap();
        pool.install(|| {
            let mut t = Trainer::new(model, Curvature::new(-1.0).unwrap(), g, p, None).unwrap();
            let mut losses = Vec::new();
            while t.epoch() < epochs {
                // uneven calls: batches are never split
                if let Some(l) = t.run(5).epoch_loss {
                    losses.push(l);
                }
            }
            (t.points(), losses)
        })
    }

    #[test]
    fn one_and_two_threads_are_bit_identical() {
        for model in [Model::Poincare, Model::Hyperboloid] {
            let (p1, l1) = train(model, 1, 6);
            let (p2, l2) = train(model, 2, 6);
            assert_eq!(p1, p2);
            assert_eq!(l1, l2);
            // weighted negatives in the first epochs too
            let (p1, l1) = train_with(model, 1, 6, 3);
            let (p2, l2) = train_with(model, 2, 6, 3);
            assert_eq!(p1, p2);
            assert_eq!(l1, l2);
            assert_ne!(p1, train(model, 1, 6).0);
        }
    }

    #[test]
    fn hard_negatives_are_deterministic_and_change_the_run() {
        // pool draws do not depend on the thread count, and they change the
        // trajectory
        let run = |threads: usize, hard: usize| {
            let p = Params { burn_in: 1, seed: 5, hard_negatives: hard, hard_pool: 6, hard_every: 2, ..small_params() };
            let (points, losses) = run_tree(Model::Poincare, threads, 6, true, p);
            assert!(losses.iter().all(|l| l.is_finite()));
            points
        };
        let plain = run(1, 0);
        let hard = run(1, 3);
        assert_eq!(hard, run(2, 3));
        assert_ne!(plain, hard);
        assert_eq!(plain, run(2, 0));
    }

    #[test]
    fn loss_decreases_and_models_agree() {
        let (pp, lp) = train(Model::Poincare, 2, 30);
        let (ph, lh) = train(Model::Hyperboloid, 2, 30);
        assert!(lp[29] < 0.6 * lp[0], "{lp:?}");
        // the same intrinsic steps from the same start: the hyperboloid's
        // points map to the Poincaré ones (x_s/(1 + x0)) up to rounding
        let n = pp.len() / 3;
        let mut worst = 0.0f64;
        for i in 0..n {
            let x0 = ph[i * 4];
            for j in 0..3 {
                worst = worst.max((ph[i * 4 + 1 + j] / (1.0 + x0) - pp[i * 3 + j]).abs());
            }
        }
        assert!(worst < 1e-6, "{worst}");
        for (a, b) in lp.iter().zip(&lh) {
            assert!((a - b).abs() < 1e-6 * a.abs().max(1.0));
        }
    }

    #[test]
    fn fast_step_matches_the_exact_exponential_map() {
        // reference: poincare::exp_map_g (the double-double exponential map,
        // itself checked against mpmath in tests/python); random points and
        // steps up to the fast path's limit (common practice)
        let mut rng = Rng::new(7);
        for kv in [-1.0, -0.25, -9.0] {
            let k = Curvature::new(kv).unwrap();
            let mut worst = 0.0f64;
            let mut taken = 0;
            for _ in 0..2000 {
                let d = 1 + rng.below(12) as usize;
                let r = rng.uniform().powf(0.2) * 0.999 * k.radius;
                let mut x: Vec<f64> = (0..d).map(|_| 2.0 * rng.uniform() - 1.0).collect();
                let nx = sumsq(&x).sqrt();
                x.iter_mut().for_each(|c| *c *= r / nx);
                let g = checked_gap(&k, &x).unwrap().value();
                let len = rng.uniform() * 0.6 * g * k.radius;
                let mut v: Vec<f64> = (0..d).map(|_| 2.0 * rng.uniform() - 1.0).collect();
                let nv = sumsq(&v).sqrt();
                v.iter_mut().for_each(|c| *c *= len / nv);
                let (mut a, mut b) = (vec![0.0; d], vec![0.0; d]);
                if !fast_poincare_step(&k, &x, g, &v, &mut a) {
                    continue;
                }
                taken += 1;
                let gb = poincare::exp_map_g(&k, &x, g, &v, &mut b);
                // the gap of the fast result, exactly, against the exact map's
                let ga = checked_gap(&k, &a).unwrap().value();
                assert!((ga - gb).abs() <= 1e-12 * gb, "{ga} {gb}");
                for i in 0..d {
                    worst = worst.max((a[i] - b[i]).abs() / k.radius);
                }
            }
            assert!(taken > 1000, "{taken}");
            assert!(worst < 1e-14, "{worst}");
        }
    }

    #[test]
    fn hyperboloid_short_step_matches_its_exponential_map() {
        // reference: the hyperboloid's own exponential map of the
        // pushed-forward tangent (`exp_spatial`, checked against mpmath in
        // tests/python), which the long steps take; random records out to
        // 17 R and gradients up to the short form's limit (common practice)
        let mut rng = Rng::new(11);
        for kv in [-1.0, -0.25, -9.0] {
            let k = Curvature::new(kv).unwrap();
            let (mut worst, mut taken) = (0.0f64, 0);
            for _ in 0..2000 {
                let d = 1 + rng.below(12) as usize;
                let lay = Layout::new(Model::Hyperboloid, d);
                let r = rng.uniform() * 17.0; // hyperbolic radius in units of R
                let mut x: Vec<f64> = (0..d).map(|_| 2.0 * rng.uniform() - 1.0).collect();
                let nx = sumsq(&x).sqrt();
                let t = (0.5 * r).tanh() * k.radius;
                x.iter_mut().for_each(|c| *c *= t / nx);
                let mut pt = vec![0.0; d + 1];
                hyperboloid::from_poincare(&k, &x, checked_gap(&k, &x).unwrap().value(), &mut pt);
                let mut rec = vec![0.0; lay.width()];
                lay.store(&k, &pt, &mut rec).unwrap();
                let (p, extra, _, g) = lay.view(&rec);
                // a Euclidean gradient whose ball step is up to 0.9 of the limit
                let lr = 0.3;
                let len = rng.uniform() * 0.9 * FAST_MAX_HALF_STEP * g / k.sqrt_kappa;
                let mut gr: Vec<f64> = (0..d).map(|_| 2.0 * rng.uniform() - 1.0).collect();
                let ng = sumsq(&gr).sqrt();
                gr.iter_mut().for_each(|c| *c *= len / (lr * 0.25 * g * g * ng));
                let mut out = vec![0.0; lay.width()];
                let mut tmp = vec![0.0; 3 * d + 1];
                assert_eq!(step(&lay, &k, &rec, &gr, lr, &mut out, &mut tmp), 0);
                let mut got = vec![0.0; d + 1];
                lay.point(&k, &out, &mut got);
                if got == pt {
                    continue;
                }
                // the exact map of the hyperboloid tangent of the same step
                let pg: f64 = p.iter().zip(&gr).map(|(a, b)| a * b).sum();
                let v: Vec<f64> = (0..d).map(|i| -lr * (0.5 * g * gr[i] + k.kappa * pg * p[i])).collect();
                let (xs, cx) = (&extra[d..2 * d], extra[2 * d]);
                let mut ys = vec![0.0; d];
                hyperboloid::exp_spatial(&k, xs, cx, &v, &mut ys);
                let mut want = vec![0.0; d + 1];
                hyperboloid::write_point(&k, &ys, &mut want);
                taken += 1;
                let h = hyperboloid::half_delta(&k, &got[1..], got[0] / k.radius, &want[1..], want[0] / k.radius);
                worst = worst.max(2.0 * h.sqrt().asinh()); // distance / R
            }
            assert!(taken > 1500, "{taken}");
            // float64 Poincaré coordinates resolve ~2^-52 R / g of distance
            // (g ~ 4e^-17 at 17 R): about 1e-8 R at the rim of the sample
            assert!(worst < 2e-8, "{worst}");
        }
    }

    #[test]
    fn linear_schedule_and_node_mean() {
        // the rate follows its definition (Params::decay_epochs): burn-in
        // factor, then linear from the full rate to the floor
        let (n, edges) = tree_closure(2, 3);
        let g = Graph::new(n, &edges, false).unwrap();
        let p = Params {
            dim: 2,
            learning_rate: 0.8,
            burn_in: 2,
            burn_in_factor: 0.25,
            decay_epochs: 12,
            batch_size: 1 << 20,
            ..Params::default()
        };
        let mut t = Trainer::new(Model::Poincare, Curvature::new(-1.0).unwrap(), g.clone(), p.clone(), None).unwrap();
        let mut want = vec![0.2, 0.2, 0.8];
        for e in 3..14 {
            want.push((0.8 * (1.0 - (e - 2) as f64 / 10.0)).max(0.008));
        }
        for (e, w) in want.iter().enumerate() {
            assert_eq!(t.epoch(), e);
            assert!((t.rate(0) - w).abs() < 1e-15, "epoch {e}: {} vs {w}", t.rate(0));
            t.run(usize::MAX);
        }
        assert!(Params { decay_epochs: 2, ..p.clone() }.check().unwrap_err().to_string().contains("decay_epochs"));
        // one batch per epoch, huge rate: with node_mean no node moves more
        // than one positive's step (a gradient of norm at most 1 + negatives
        // scaled by the rate), while summed hub steps go much further
        let far = |mean: bool| {
            let p = Params {
                dim: 2,
                learning_rate: 0.05,
                burn_in: 0,
                batch_size: 1 << 20,
                node_mean: mean,
                ..Params::default()
            };
            let k = Curvature::new(-1.0).unwrap();
            let mut t = Trainer::new(Model::Poincare, k, g.clone(), p, None).unwrap();
            let before = t.points();
            t.run(usize::MAX);
            let after = t.points();
            // handbook: d = acosh(1 + 2|x - y|^2 / ((1 - |x|^2)(1 - |y|^2)))
            let (x, y) = (&before[..2], &after[..2]);
            let q = 2.0 * seq_dist_sq(x, y) / ((1.0 - sumsq(x)) * (1.0 - sumsq(y)));
            (1.0 + q).acosh()
        };
        let (m, s) = (far(true), far(false));
        assert!(m <= 2.0 * 0.05 + 1e-12, "{m}");
        assert!(s > 3.0 * m, "{s} {m}");
    }

    #[test]
    fn huge_steps_stay_inside() {
        let (n, edges) = tree_closure(2, 4);
        let g = Graph::new(n, &edges, false).unwrap();
        for model in [Model::Poincare, Model::Hyperboloid] {
            let p = Params { dim: 2, negatives: 5, learning_rate: 1e6, burn_in: 0, batch_size: 4, ..Params::default() };
            let k = Curvature::new(-1.0).unwrap();
            let mut t = Trainer::new(model, k, g.clone(), p, None).unwrap();
            for _ in 0..3 {
                t.run(usize::MAX);
            }
            let pts = t.points();
            let w = t.width();
            for r in pts.chunks_exact(w) {
                if model == Model::Poincare {
                    assert!(checked_gap(&k, r).is_ok(), "{r:?}");
                } else {
                    assert!(hyperboloid::read_point(&k, r).is_ok(), "{r:?}");
                }
            }
            if model == Model::Poincare {
                assert!(t.shortened() > 0);
            }
        }
    }

    #[test]
    fn a_run_from_the_starting_points_repeats_the_run() {
        // common practice (a warm start): the draws do not depend on the
        // start, so starting from the points of a fresh trainer repeats its
        // run bit for bit; a bad start names the argument and the row
        let (n, edges) = tree_closure(2, 4);
        let g = Graph::new(n, &edges, false).unwrap();
        let k = Curvature::new(-0.5).unwrap();
        for model in [Model::Poincare, Model::Hyperboloid] {
            let p = Params { dim: 3, burn_in: 2, batch_size: 8, seed: 5, ..Params::default() };
            let mut a = Trainer::new(model, k, g.clone(), p.clone(), None).unwrap();
            let w = a.width();
            let start = ndarray::Array2::from_shape_vec((n, w), a.points()).unwrap().into_dyn();
            let data = Data::F64(start.view());
            let mut b = Trainer::new(model, k, g.clone(), p.clone(), Some(&data)).unwrap();
            assert_eq!(a.points(), b.points());
            for _ in 0..6 {
                a.run(usize::MAX);
                b.run(usize::MAX);
            }
            assert_eq!(a.points(), b.points());
            assert_eq!(a.losses(), b.losses());
            let mut bad = start.clone();
            bad[[5, 0]] = f64::NAN;
            let data = Data::F64(bad.view());
            let err = Trainer::new(model, k, g.clone(), p.clone(), Some(&data)).err().unwrap().to_string();
            assert!(err.contains("init") && err.contains("row 5"), "{err}");
        }
    }
}
