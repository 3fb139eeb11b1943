//! Graph reconstruction (Nickel & Kiela 2017): how well the distances of an
//! embedding rank each node's graph neighbours ahead of the other nodes. The
//! neighbours of `u` are its neighbours in an undirected graph, or its
//! targets `{v : (u, v) an edge}` in a directed one (the paper's protocol:
//! each observed `(u, v)` ranked among `{v' : (u, v') not observed}`).
//!
//! For a node `u` with neighbours `N(u)` (`k = |N(u)|`), every `v != u` is
//! ranked by `h(u, v) = sinh(d/2R)^2` (monotone in the distance, computed by
//! the tiled kernel of `pairwise::matrix`, so exactly the value behind every
//! other distance of the library). With `t_1 <= ... <= t_k` the neighbours'
//! values:
//! * average precision of `u`: the mean over `v` in `N(u)` of
//!   `#{v' in N(u): h(u, v') <= h(u, v)} / #{w != u: h(u, w) <= h(u, v)}`.
//!   Ties count against: every node tied with `v` is ranked at or above it,
//!   the convention of scikit-learn's `label_ranking_average_precision_score`;
//! * rank of an edge `(u, v)`: `1 + #{w not in N(u), w != u: h(u, w) < h(u, v)}`
//!   (strict: a non-neighbour tied with `v` does not push it down), over
//!   both directions of every undirected edge.
//!
//! Exact over all `n (n - 1)` ordered pairs, without storing them: each
//! row `u` keeps its sorted `t` and a histogram over the `k` gaps below
//! them (where `h(u, w)` falls), plus the rare exact ties; prefix sums give
//! both counts for every neighbour. A column with `h` above `t_k`
//! (most of them in a good embedding) costs one comparison, as in `knn`.
//! Rows run in the fixed strips of `matrix::sweep_self` and every reduction
//! is in node order (integer rank sums), so results do not depend on the
//! thread count. Memory: O(n + m) plus the packed points.

use crate::error::{Error, Result};
use crate::pairwise::matrix::{sweep_self, PANEL};
use crate::pairwise::Prepared;

/// Neighbour lists of a graph on `n` nodes (CSR, each list sorted,
/// duplicates removed): of an undirected graph, or the out-neighbours
/// (targets) of a directed one.
#[derive(Clone, Debug)]
pub struct Adjacency {
    pub indptr: Vec<usize>,
    pub indices: Vec<usize>,
}

impl Adjacency {
    /// From `(m, 2)` edge rows (row-major, `2 m` values). Undirected: each
    /// row is an edge; repeated edges and both directions of one edge are
    /// the same edge. `directed`: each row `(u, v)` makes `v` a neighbour of
    /// `u` only (repeated rows count once). Errors name the first bad row: a
    /// node outside `0..n`, a self-loop, or no edge at all.
    pub fn from_edges(n: usize, edges: &[i64], directed: bool) -> Result<Adjacency> {
        if edges.len() % 2 != 0 {
            return Err(Error::Value("edges must have shape (m, 2)".into()));
        }
        let m = edges.len() / 2;
        if m == 0 {
            return Err(Error::Value("edges is empty: reconstruction needs at least one edge".into()));
        }
        let mut deg = vec![0usize; n + 1];
        for (r, e) in edges.chunks_exact(2).enumerate() {
            for &v in e {
                if v < 0 || v as u64 >= n as u64 {
                    return Err(Error::Value(format!(
                        "edges row {r}: ({}, {}) names node {v}, out of range for {n} points (x has {n} rows)",
                        e[0], e[1]
                    )));
                }
            }
            if e[0] == e[1] {
                return Err(Error::Value(format!(
                    "edges row {r}: ({}, {}) is a self-loop; a node is never ranked against itself",
                    e[0], e[1]
                )));
            }
            deg[e[0] as usize] += 1;
            if !directed {
                deg[e[1] as usize] += 1;
            }
        }
        let mut indptr = vec![0usize; n + 1];
        for i in 0..n {
            indptr[i + 1] = indptr[i] + deg[i];
        }
        let mut fill = indptr.clone();
        let mut indices = vec![0usize; indptr[n]];
        for e in edges.chunks_exact(2) {
            let (a, b) = (e[0] as usize, e[1] as usize);
            indices[fill[a]] = b;
            fill[a] += 1;
            if !directed {
                indices[fill[b]] = a;
                fill[b] += 1;
            }
        }
        // Sort and deduplicate each list, compacting in place.
        let mut out = 0usize;
        let mut new_ptr = vec![0usize; n + 1];
        for i in 0..n {
            let (s, e) = (indptr[i], indptr[i + 1]);
            indices[s..e].sort_unstable();
            let mut last = usize::MAX;
            for t in s..e {
                let v = indices[t];
                if v != last {
                    indices[out] = v;
                    out += 1;
                    last = v;
                }
            }
            new_ptr[i + 1] = out;
        }
        indices.truncate(out);
        Ok(Adjacency { indptr: new_ptr, indices })
    }

    #[inline(always)]
    pub fn neighbours(&self, u: usize) -> &[usize] {
        &self.indices[self.indptr[u]..self.indptr[u + 1]]
    }

    pub fn n(&self) -> usize {
        self.indptr.len() - 1
    }
}

/// The scores of one reconstruction.
#[derive(Clone, Debug)]
pub struct Reconstruction {
    /// Mean over the nodes with neighbours of their average precision.
    pub mean_average_precision: f64,
    /// Mean rank over the edges ranked: both directions of every undirected
    /// edge, or every distinct row of a directed graph.
    pub mean_rank: f64,
    /// Average precision per node (NaN for a node without neighbours, for
    /// which it is undefined).
    pub average_precision: Vec<f64>,
    /// Nodes with at least one neighbour.
    pub ranked_nodes: usize,
    /// Edges ranked (twice the undirected edges; the distinct rows of a
    /// directed graph).
    pub ranked_edges: usize,
    /// The rank of every ranked arc `(u, v)`, in the order of the
    /// adjacency's lists (`ranks[adj.indptr[u] + i]` for `v =
    /// adj.neighbours(u)[i]`); `mean_rank` is their mean.
    pub ranks: Vec<u64>,
}

/// Above this degree a row locates a column among its neighbours' values by
/// binary search; up to it, by counting all of them across the 8 lanes of a
/// panel at once (vectorised, branch-free).
const LINEAR_MAX: usize = 16;

/// Per-row state of the sweep.
struct Row {
    /// The node.
    u: usize,
    /// Its degree.
    k: usize,
    /// The neighbours' `h`, ascending, then `+inf` (a sentinel no column
    /// equals).
    t: Vec<f64>,
    /// `perm[i]`: the position in `adj.neighbours(u)` of the neighbour
    /// whose value is `t[i]`.
    perm: Vec<u32>,
    /// `below[p]`: columns (the node itself included, removed at the end)
    /// with exactly `p` of the neighbours' `h` strictly below theirs;
    /// `below[k]` collects the columns beyond every neighbour.
    below: Vec<u64>,
    /// Columns whose `h` equals some `t` (ties, rare): `(p, q)` with `q` the
    /// count of `t` at or below it (`q = p` for every other column).
    ties: Vec<(u32, u32)>,
}

impl Row {
    fn new(x: &Prepared, adj: &Adjacency, u: usize) -> Row {
        let nb = adj.neighbours(u);
        let h: Vec<f64> = nb.iter().map(|&v| x.half_delta(u, x, v)).collect();
        let mut perm: Vec<u32> = (0..h.len() as u32).collect();
        perm.sort_unstable_by(|&a, &b| h[a as usize].total_cmp(&h[b as usize]));
        let mut t: Vec<f64> = perm.iter().map(|&i| h[i as usize]).collect();
        let k = t.len();
        t.push(f64::INFINITY);
        Row { u, k, t, perm, below: vec![0; k + 1], ties: Vec::new() }
    }

    /// Records a column with value `h` that has `p <= k` of the neighbours'
    /// `h` strictly below it. Branch-free but for the rare tie: whether a
    /// column is beyond every neighbour is a coin toss in a poor embedding.
    #[inline(always)]
    fn record(&mut self, p: usize, h: f64) {
        self.below[p] += 1;
        if self.t[p] == h {
            self.tie(p, h);
        }
    }

    #[cold]
    #[inline(never)]
    fn tie(&mut self, p: usize, h: f64) {
        let q = p + self.t[p..].iter().take_while(|&&t| t == h).count();
        self.ties.push((p as u32, q as u32));
    }

    /// Takes the columns `j0 + l` (`l < valid`) of one panel.
    #[inline(always)]
    fn visit(&mut self, hs: &[f64; PANEL], valid: usize) {
        let k = self.k;
        if k == 0 {
            return;
        }
        let top = self.t[k - 1];
        let mut any = false;
        for &h in hs {
            any |= h <= top;
        }
        if !any {
            return;
        }
        if k <= LINEAR_MAX {
            let mut p = [0u32; PANEL];
            for &t in &self.t[..k] {
                for l in 0..PANEL {
                    p[l] += u32::from(t < hs[l]);
                }
            }
            for l in 0..valid {
                self.record(p[l] as usize, hs[l]);
            }
        } else {
            for &h in &hs[..valid] {
                if h <= top {
                    let p = self.t[..k].partition_point(|&t| t < h);
                    self.record(p, h);
                }
            }
        }
    }

    /// (average precision, sum of ranks) of the row, and the rank of each
    /// neighbour (in the order of `adj.neighbours(u)`) in `rank`; `k > 0`.
    fn finish(&self, rank: &mut [u64]) -> (f64, u64) {
        let k = self.k;
        // A column w with p = #{t < h_w} and q = #{t <= h_w} has
        // h_w <= t_i exactly when p <= i, and h_w < t_i exactly when q <= i:
        // prefix sums of the two histograms count them for every i. The
        // histogram over q is the one over p with each tie moved from p to q.
        let mut below: Vec<i64> = self.below.iter().map(|&c| c as i64).collect();
        let mut at_or_below = below.clone();
        for &(p, q) in &self.ties {
            at_or_below[p as usize] -= 1;
            at_or_below[q as usize] += 1;
        }
        // The node itself was swept with h = 0 exactly (x - x = 0 in every
        // pair space): p = 0, q = #{t <= 0}. Take it out.
        below[0] -= 1;
        at_or_below[self.t.iter().take_while(|&&t| t <= 0.0).count()] -= 1;
        let (mut le, mut lt) = (0i64, 0i64);
        let (mut ap, mut ranks) = (0.0f64, 0u64);
        let mut i = 0;
        while i < k {
            // The tied neighbours t[i..j]: j of the neighbours are at or
            // below them, i strictly below.
            let mut j = i + 1;
            while j < k && self.t[j] == self.t[i] {
                j += 1;
            }
            for g in i..j {
                le += below[g];
                lt += at_or_below[g];
            }
            // No column has i < p < j or i < q < j (the t in the group are
            // equal), so le now counts p <= i and lt counts q <= i: the
            // columns at or below t_i and strictly below it.
            ap += (j as f64 / le as f64) * (j - i) as f64;
            let r = 1 + lt as u64 - i as u64;
            ranks += r * (j - i) as u64;
            for &pos in &self.perm[i..j] {
                rank[pos as usize] = r;
            }
            i = j;
        }
        (ap / k as f64, ranks)
    }
}

/// Graph reconstruction scores of the points `x` for the graph `adj`
/// (exact, over all ordered pairs; see the module notes).
pub fn reconstruction(x: &Prepared, adj: &Adjacency) -> Result<Reconstruction> {
    if adj.n() != x.n {
        return Err(Error::Value(format!("the graph has {} nodes but x has {} points", adj.n(), x.n)));
    }
    let parts = sweep_self(
        x,
        |rows| rows.map(|u| Row::new(x, adj, u)).collect::<Vec<Row>>(),
        #[inline(always)]
        |st: &mut Vec<Row>, i, _j0, hs, valid| {
            let r0 = st[0].u;
            st[i - r0].visit(hs, valid)
        },
        |st| {
            st.iter()
                .map(|r| {
                    let mut rank = vec![0u64; r.k];
                    let (ap, rs) = if r.k == 0 { (f64::NAN, 0) } else { r.finish(&mut rank) };
                    (ap, rs, rank)
                })
                .collect::<Vec<_>>()
        },
    );
    let mut average_precision = Vec::with_capacity(x.n);
    let mut ranks = Vec::with_capacity(adj.indices.len());
    let (mut sum_ap, mut ranked_nodes, mut rank_sum) = (0.0f64, 0usize, 0u128);
    for (ap, rs, rank) in parts.into_iter().flatten() {
        ranks.extend_from_slice(&rank);
        if !ap.is_nan() {
            sum_ap += ap;
            ranked_nodes += 1;
            rank_sum += u128::from(rs);
        }
        average_precision.push(ap);
    }
    let ranked_edges = adj.indices.len();
    Ok(Reconstruction {
        mean_average_precision: sum_ap / ranked_nodes as f64,
        mean_rank: rank_sum as f64 / ranked_edges as f64,
        average_precision,
        ranked_nodes,
        ranked_edges,
        ranks,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::batch::Data;
    use crate::models::ball::Curvature;
    use crate::models::Model;
    use ndarray::Array2;

    /// Points in the Poincaré disc from a fixed LCG, with some rows repeated
    /// (exact ties in h).
    fn points(n: usize, dup_every: usize) -> Array2<f64> {
        let mut s = 12345u64;
        let mut next = || {
            s = s.wrapping_mul(6364136223846793005).wrapping_add(1442695040888963407);
            (s >> 11) as f64 / (1u64 << 53) as f64
        };
        let mut x = Array2::<f64>::zeros((n, 3));
        for i in 0..n {
            if dup_every > 0 && i % dup_every == dup_every - 1 {
                let r = x.row(i - 1).to_owned();
                x.row_mut(i).assign(&r);
                continue;
            }
            for j in 0..3 {
                x[[i, j]] = (next() - 0.5) * 1.1;
            }
        }
        x
    }

    /// The definitions of the module notes, pair by pair (common practice:
    /// the direct O(n^2 k) count), and the rank of each arc `(u, v)`.
    fn brute(x: &Prepared, nbs: &[Vec<usize>]) -> (f64, f64, std::collections::HashMap<(usize, usize), u64>) {
        let n = x.n;
        let (mut sum_ap, mut nodes, mut ranks, mut edges) = (0.0, 0, 0u64, 0u64);
        let mut arc = std::collections::HashMap::new();
        for u in 0..n {
            let nb = &nbs[u];
            if nb.is_empty() {
                continue;
            }
            let h: Vec<f64> = (0..n).map(|w| x.half_delta(u, x, w)).collect();
            let mut ap = 0.0;
            for &v in nb.iter() {
                let all = (0..n).filter(|&w| w != u && h[w] <= h[v]).count();
                let rel = nb.iter().filter(|&&w| h[w] <= h[v]).count();
                ap += rel as f64 / all as f64;
                let ahead = (0..n).filter(|&w| w != u && !nb.contains(&w) && h[w] < h[v]).count();
                ranks += 1 + ahead as u64;
                arc.insert((u, v), 1 + ahead as u64);
                edges += 1;
            }
            sum_ap += ap / nb.len() as f64;
            nodes += 1;
        }
        (sum_ap / nodes as f64, ranks as f64 / edges as f64, arc)
    }

    #[test]
    fn matches_brute_force_with_ties_and_high_degree() {
        let n = 203;
        let pts = points(n, 7);
        let x = Prepared::new(Model::Poincare, Curvature::new(-1.0).unwrap(), "x", &Data::F64(pts.view().into_dyn()))
            .unwrap();
        // A random graph plus a hub joined to 60 nodes (the binary-search
        // path) and edges to duplicated points (ties among neighbours).
        let mut e = Vec::new();
        let mut s = 99u64;
        for _ in 0..400 {
            s = s.wrapping_mul(6364136223846793005).wrapping_add(1);
            let a = (s >> 33) as usize % n;
            let b = (s >> 13) as usize % n;
            if a != b {
                e.extend_from_slice(&[a as i64, b as i64]);
            }
        }
        for v in 1..61 {
            e.extend_from_slice(&[0, v]);
        }
        e.extend_from_slice(&[10, 5, 10, 6, 5, 10]);
        for directed in [false, true] {
            // the neighbour sets straight from the rows
            let mut nbs = vec![Vec::new(); n];
            for r in e.chunks_exact(2) {
                let (a, b) = (r[0] as usize, r[1] as usize);
                for (p, q) in [(a, b), (b, a)].into_iter().take(if directed { 1 } else { 2 }) {
                    if !nbs[p].contains(&q) {
                        nbs[p].push(q);
                    }
                }
            }
            let adj = Adjacency::from_edges(n, &e, directed).unwrap();
            let r = reconstruction(&x, &adj).unwrap();
            let (map, mr, arc) = brute(&x, &nbs);
            assert!((r.mean_average_precision - map).abs() <= 1e-12, "{} vs {map}", r.mean_average_precision);
            assert!((r.mean_rank - mr).abs() <= 1e-12 * mr, "{} vs {mr}", r.mean_rank);
            assert_eq!(r.ranked_edges, nbs.iter().map(|v| v.len()).sum::<usize>());
            // every arc's rank, in the adjacency's order (ties among the
            // neighbours of 10 and of 5 included)
            assert_eq!(r.ranks.len(), r.ranked_edges);
            for u in 0..n {
                for (i, &v) in adj.neighbours(u).iter().enumerate() {
                    assert_eq!(r.ranks[adj.indptr[u] + i], arc[&(u, v)], "arc ({u}, {v}), directed {directed}");
                }
            }
        }
    }

    #[test]
    fn bad_edges_name_the_row() {
        let err = |e: &[i64]| match Adjacency::from_edges(5, e, false) {
            Err(Error::Value(m)) => m,
            other => panic!("{other:?}"),
        };
        assert!(err(&[0, 1, 2, 5]).contains("edges row 1"));
        assert!(err(&[0, 1, -1, 2]).contains("edges row 1"));
        assert!(err(&[0, 1, 1, 2, 3, 3]).contains("edges row 2"));
        assert!(err(&[]).contains("empty"));
    }
}
