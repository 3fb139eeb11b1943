//! Distance matrices, condensed distances, brute-force k nearest neighbours
//! and radius queries over prepared point sets.
//!
//! One register-tiled kernel serves every model (each is stored in its pair
//! space, see `pairwise`): 4 rows against a panel of 8 packed columns, squared differences accumulated in coordinate
//! order (no Gram-matrix shortcut: `|x|^2 + |y|^2 - 2 x.y` loses every digit
//! for close pairs), then `h = |x - y|^2 a_x a_y s` and one transcendental,
//! `R acosh(1 + 2h)`, per pair. Rankings use `h` itself (monotone in the
//! distance), so neighbour search needs no transcendental per pair. Every
//! path evaluates `h` in the same order as `Prepared::half_delta`, so the
//! matrix, the neighbour functions and the metric tree report bit-identical
//! distances. Rows are processed in parallel strips whose size does not
//! depend on the thread count: results are bit-identical for any number of
//! threads.

use rayon::prelude::*;

use crate::error::{value_err, Result};
use crate::numeric::simd;
use crate::pairwise::{distance_from_h, pair_scale, scaled_h, PairSpace, Prepared, REFINE_BELOW};

/// Output element types.
pub trait Store: Copy + Send + Sync + Default + 'static {
    fn from_f64(v: f64) -> Self;
}
impl Store for f64 {
    #[inline(always)]
    fn from_f64(v: f64) -> Self {
        v
    }
}
impl Store for f32 {
    #[inline(always)]
    fn from_f64(v: f64) -> Self {
        v as f32
    }
}

const LANES: usize = 8;
const ROWS: usize = 4;
/// Rows per parallel task.
const STRIP: usize = 32;

/// Columns packed in panels of 8: `panels[p][k][l]` is coordinate `k` of
/// point `8p + l`; padding columns have factor 0 (their `h` is 0 and is
/// never stored).
struct Packed {
    w: usize,
    m: usize,
    panels: Vec<f64>,
    aux: Vec<f64>,
}

impl Packed {
    fn new(y: &Prepared) -> Packed {
        let (w, m) = (y.w, y.n);
        let np = m.div_ceil(LANES);
        let mut panels = vec![0f64; np * w * LANES];
        let mut aux = vec![0f64; np * LANES];
        for j in 0..m {
            let (p, l) = (j / LANES, j % LANES);
            for k in 0..w {
                panels[(p * w + k) * LANES + l] = y.coords[j * w + k];
            }
            aux[p * LANES + l] = y.aux[j];
        }
        Packed { w, m, panels, aux }
    }
    fn npanels(&self) -> usize {
        self.m.div_ceil(LANES)
    }
    #[inline(always)]
    fn panel(&self, p: usize) -> (&[f64], &[f64; LANES]) {
        let a: &[f64; LANES] = self.aux[p * LANES..(p + 1) * LANES].try_into().unwrap();
        (&self.panels[p * self.w * LANES..(p + 1) * self.w * LANES], a)
    }
}

/// `h` for `R` rows starting at `i0` against one packed panel: squared
/// differences accumulated in coordinate order (the order of
/// [`seq_dist_sq`]), then finished as [`Prepared::finish_h`] does.
#[inline(always)]
fn tile_h<const R: usize, const REFINE: bool>(
    x: &Prepared,
    y: &Prepared,
    i0: usize,
    j0: usize,
    panel: &[f64],
    ay: &[f64; LANES],
    s: f64,
    acc: &mut [[f64; LANES]; R],
) {
    let w = x.w;
    *acc = [[0f64; LANES]; R];
    let xr: [&[f64]; R] = std::array::from_fn(|r| &x.coords[(i0 + r) * w..(i0 + r + 1) * w]);
    for (k, yk) in panel.chunks_exact(LANES).enumerate().take(w) {
        let yk: &[f64; LANES] = yk.try_into().unwrap();
        for r in 0..R {
            // SAFETY: k < w = xr[r].len() (the panel holds w groups of LANES).
            let xv = unsafe { *xr[r].get_unchecked(k) };
            for l in 0..LANES {
                let t = xv - yk[l];
                acc[r][l] = t.mul_add(t, acc[r][l]);
            }
        }
    }
    // Whether some pair of the tile may need refinement (images closer
    // than R/64, rare: see pairwise): one minimum over the tile against
    // twice the threshold (a superset of the pairs `pair_h` refines; it
    // decides each pair exactly), the rare tiles finished out of line. A
    // product and a comparison per pair, with the refinement inline, cost
    // knn at d = 10 about 19% over the Poincaré kernel; this, about 5%.
    let lim = 2.0 * REFINE_BELOW / x.curvature.kappa;
    let mut m = [f64::INFINITY; LANES];
    if REFINE {
        for row in acc.iter() {
            for l in 0..LANES {
                m[l] = if row[l] < m[l] { row[l] } else { m[l] };
            }
        }
    }
    let mut close = false;
    for l in 0..LANES {
        close |= REFINE && m[l] < lim;
    }
    if close {
        refine_rows(x, y, i0, j0, ay, s, acc);
        return;
    }
    for r in 0..R {
        let ax = x.aux[i0 + r];
        for l in 0..LANES {
            acc[r][l] = scaled_h(acc[r][l], ax, ay[l], s);
        }
    }
}

/// [`tile_h`]'s finish for a tile where some pair may need refinement:
/// those pairs by [`Prepared::finish_h`], the rest (and the padding lanes
/// beyond `y.n`, never stored) as usual.
#[cold]
#[inline(never)]
fn refine_rows<const R: usize>(
    x: &Prepared,
    y: &Prepared,
    i0: usize,
    j0: usize,
    ay: &[f64; LANES],
    s: f64,
    acc: &mut [[f64; LANES]; R],
) {
    let valid = y.n.saturating_sub(j0).min(LANES);
    for r in 0..R {
        let ax = x.aux[i0 + r];
        for l in 0..LANES {
            acc[r][l] =
                if l < valid { x.finish_h(acc[r][l], i0 + r, y, j0 + l) } else { scaled_h(acc[r][l], ax, ay[l], s) };
        }
    }
}

/// Calls `f(i, j0, hs, valid)` for rows `rows` of `x` against all of `y`,
/// where `hs[l]` is `h(i, j0 + l)` for the (up to 8) columns of one panel;
/// only the first `valid` lanes are real columns.
#[inline(always)]
fn for_each_h(
    x: &Prepared,
    y: &Prepared,
    pk: &Packed,
    rows: std::ops::Range<usize>,
    f: impl FnMut(usize, usize, &[f64; LANES], usize),
) {
    // Monomorphised on whether the model's pair space can need refinement,
    // so the models stored in their own coordinates carry no check at all.
    if x.space() == PairSpace::Own {
        for_each_h_in::<false>(x, y, pk, rows, f)
    } else {
        for_each_h_in::<true>(x, y, pk, rows, f)
    }
}

#[inline(always)]
fn for_each_h_in<const REFINE: bool>(
    x: &Prepared,
    y: &Prepared,
    pk: &Packed,
    rows: std::ops::Range<usize>,
    mut f: impl FnMut(usize, usize, &[f64; LANES], usize),
) {
    let s = pair_scale(x.model, &x.curvature);
    for p in 0..pk.npanels() {
        let (panel, ay) = pk.panel(p);
        let j0 = p * LANES;
        let valid = (y.n - j0).min(LANES);
        let mut i = rows.start;
        let mut h = [[0f64; LANES]; ROWS];
        let mut h1 = [[0f64; LANES]; 1];
        while i + ROWS <= rows.end {
            tile_h::<ROWS, REFINE>(x, y, i, j0, panel, ay, s, &mut h);
            for r in 0..ROWS {
                f(i + r, j0, &h[r], valid);
            }
            i += ROWS;
        }
        while i < rows.end {
            tile_h::<1, REFINE>(x, y, i, j0, panel, ay, s, &mut h1);
            f(i, j0, &h1[0], valid);
            i += 1;
        }
    }
}

/// [`for_each_h`] inside the best SIMD copy of the loop the CPU has (`fast`
/// from `simd::has_fma`): the one entry of every driver below.
#[inline(always)]
fn strip_h(
    fast: bool,
    x: &Prepared,
    y: &Prepared,
    pk: &Packed,
    rows: std::ops::Range<usize>,
    f: impl FnMut(usize, usize, &[f64; LANES], usize),
) {
    simd::dispatch(
        fast,
        #[inline(always)]
        || for_each_h(x, y, pk, rows, f),
    )
}

/// All pairs of `x` and `y`, row strips of `x` in parallel, for work that
/// keeps per-row state instead of storing distances: `init(r0..r1)` makes a
/// strip's state, `visit(state, i, j0, hs, valid)` sees `h(i, j0 + l)` for
/// the `valid` real columns of one panel (the tiled kernel, so `h` is
/// bit-identical to every other path), and `finish(state)` turns it into the
/// strip's result. Results come back in strip order; strips have a fixed
/// size, so they do not depend on the thread count. Memory: the packed copy
/// of `y` plus one state per running strip.
fn sweep<S, T, I, V, F>(x: &Prepared, y: &Prepared, init: I, visit: V, finish: F) -> Vec<T>
where
    T: Send,
    I: Fn(std::ops::Range<usize>) -> S + Sync,
    V: Fn(&mut S, usize, usize, &[f64; LANES], usize) + Sync,
    F: Fn(S) -> T + Sync,
{
    let n = x.n;
    if n == 0 {
        return Vec::new();
    }
    let packed = Packed::new(y);
    let fast = simd::has_fma();
    (0..n.div_ceil(STRIP))
        .into_par_iter()
        .map(|s| {
            let (r0, r1) = (s * STRIP, ((s + 1) * STRIP).min(n));
            let mut st = init(r0..r1);
            strip_h(
                fast,
                x,
                y,
                &packed,
                r0..r1,
                #[inline(always)]
                |i, j0, hs, valid| visit(&mut st, i, j0, hs, valid),
            );
            finish(st)
        })
        .collect()
}

fn check_pair(x: &Prepared, y: &Prepared, names: (&str, &str)) -> Result<()> {
    x.check_compatible(y, names)
}

/// Fills `out` (row-major `x.n x y.n`) with all pairwise distances.
pub fn distance_matrix_into<T: Store>(x: &Prepared, y: &Prepared, out: &mut [T]) -> Result<()> {
    check_pair(x, y, ("x", "y"))?;
    let (n, m) = (x.n, y.n);
    if out.len() != n * m {
        return value_err(format!("out must have shape ({n}, {m})"));
    }
    if n == 0 || m == 0 {
        return Ok(());
    }
    let packed = Packed::new(y);
    let kc = &x.curvature;
    let fast = simd::has_fma();
    out.par_chunks_mut(STRIP * m).enumerate().for_each(|(s, block)| {
        let r0 = s * STRIP;
        let r1 = (r0 + STRIP).min(n);
        strip_h(
            fast,
            x,
            y,
            &packed,
            r0..r1,
            #[inline(always)]
            |i, j0, hs, valid| {
                // All 8 lanes at once (padding lanes have h = 0), so the
                // transcendental vectorises; only valid lanes are stored.
                let mut dv = [0f64; LANES];
                for l in 0..LANES {
                    dv[l] = distance_from_h(kc, hs[l]);
                }
                let at = (i - r0) * m + j0;
                if valid == LANES {
                    // Fixed length: plain stores, not a memcpy call per tile row.
                    let row: &mut [T; LANES] = (&mut block[at..at + LANES]).try_into().unwrap();
                    for l in 0..LANES {
                        row[l] = T::from_f64(dv[l]);
                    }
                } else {
                    for l in 0..valid {
                        block[at + l] = T::from_f64(dv[l]);
                    }
                }
            },
        )
    });
    Ok(())
}

/// The upper triangle (i < j) of the distance matrix of `x` with itself,
/// row-major, length n (n - 1) / 2.
pub fn condensed_into<T: Store>(x: &Prepared, out: &mut [T]) -> Result<()> {
    let n = x.n;
    if out.len() != n * n.saturating_sub(1) / 2 {
        return value_err("out has the wrong length for a condensed distance vector");
    }
    if n < 2 {
        return Ok(());
    }
    let packed = Packed::new(x);
    let kc = &x.curvature;
    let fast = simd::has_fma();
    // Split the output at strip boundaries: row i starts at i n - i (i + 1)/2.
    let start = |i: usize| i * n - i * (i + 1) / 2;
    let mut pieces: Vec<(usize, &mut [T])> = Vec::new();
    let mut rest: &mut [T] = out;
    let mut r0 = 0;
    while r0 < n {
        let r1 = (r0 + STRIP).min(n);
        let len = start(r1) - start(r0);
        let (a, b) = rest.split_at_mut(len);
        pieces.push((r0, a));
        rest = b;
        r0 = r1;
    }
    pieces.into_par_iter().for_each(|(r0, block)| {
        let r1 = (r0 + STRIP).min(n);
        let base = start(r0);
        strip_h(
            fast,
            x,
            x,
            &packed,
            r0..r1,
            #[inline(always)]
            |i, j0, hs, valid| {
                if j0 + valid <= i + 1 {
                    return;
                }
                let mut dv = [0f64; LANES];
                for l in 0..LANES {
                    dv[l] = distance_from_h(kc, hs[l]);
                }
                for l in 0..valid {
                    let j = j0 + l;
                    if j > i {
                        block[start(i) + (j - i - 1) - base] = T::from_f64(dv[l]);
                    }
                }
            },
        )
    });
    Ok(())
}

/// Relative slack on `h` within which candidates count as possible ties:
/// `h` ranks exactly like the distance except where two distances round to
/// the same float64 (or swap by an ulp) while their `h` differ in the last
/// bits. Such near-ties are kept and settled by (distance, index).
const TIE_SLACK: f64 = 1e-13;

/// A sorted candidate list: the `k` smallest `(h, j)` seen so far, plus any
/// candidates within `TIE_SLACK` of the k-th (possible ties at the boundary).
struct TopK {
    h: Vec<f64>,
    j: Vec<usize>,
    k: usize,
}

impl TopK {
    fn new(k: usize) -> TopK {
        TopK { h: Vec::with_capacity(k + 2), j: Vec::with_capacity(k + 2), k }
    }
    /// Candidates with `h` above this can never enter.
    #[inline(always)]
    fn worst(&self) -> f64 {
        if self.h.len() < self.k {
            f64::INFINITY
        } else {
            self.h[self.k - 1] * (1.0 + TIE_SLACK)
        }
    }
    #[inline(always)]
    fn push(&mut self, h: f64, j: usize) {
        if h > self.worst() {
            return;
        }
        let mut pos = self.h.len();
        while pos > 0 && (self.h[pos - 1] > h || (self.h[pos - 1] == h && self.j[pos - 1] > j)) {
            pos -= 1;
        }
        self.h.insert(pos, h);
        self.j.insert(pos, j);
        // Drop tail entries no longer within the tie slack of the k-th.
        let lim = self.worst();
        while self.h.len() > self.k && *self.h.last().unwrap() > lim {
            self.h.pop();
            self.j.pop();
        }
    }
}

/// Whether some lane of a panel row is at most `lim`: one vector comparison
/// for the eight lanes, so that a row with no candidate (most rows once a
/// neighbour list is full) costs no branch per lane (knn of 20 000 x 10
/// points, one thread: 2.28 -> 1.63 s in a Rust harness, 1.67 -> 1.43 s
/// from Python). Padding lanes (`h = 0`) count; the callers then test the
/// valid lanes one by one.
#[inline(always)]
fn any_at_most(hs: &[f64; LANES], lim: f64) -> bool {
    let mut any = false;
    for &h in hs {
        any |= h <= lim;
    }
    any
}

/// Final ordering of neighbour lists: by distance, then index.
fn sort_pairs(d: &mut [f64], j: &mut [i64]) {
    let mut v: Vec<(f64, i64)> = d.iter().copied().zip(j.iter().copied()).collect();
    v.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)));
    for (t, (a, b)) in v.into_iter().enumerate() {
        d[t] = a;
        j[t] = b;
    }
}

/// Brute-force `k` nearest neighbours of every row of `x` among the rows of
/// `y`; with `exclude_self`, `x` and `y` are the same set and row `i` never
/// lists itself. Returns row-major `(n, k)` indices and distances, each row
/// ascending by (distance, index). Memory: O(n k) plus one tile per thread.
pub fn knn(x: &Prepared, y: &Prepared, k: usize, exclude_self: bool) -> Result<(Vec<i64>, Vec<f64>)> {
    check_pair(x, y, ("x", "y"))?;
    let avail = if exclude_self { y.n.saturating_sub(1) } else { y.n };
    if k == 0 {
        return value_err("k must be at least 1");
    }
    if k > avail {
        return value_err(format!(
            "k = {k} is larger than the number of candidate points ({avail}{})",
            if exclude_self { ", self-matches excluded" } else { "" }
        ));
    }
    let n = x.n;
    let mut idx = vec![0i64; n * k];
    let mut dist = vec![0f64; n * k];
    let kc = &x.curvature;
    let parts = sweep(
        x,
        y,
        |rows| (rows.start, rows.map(|_| TopK::new(k)).collect::<Vec<_>>()),
        #[inline(always)]
        |(r0, tops), i, j0, hs, valid| {
            let t = &mut tops[i - *r0];
            let mut worst = t.worst();
            if !any_at_most(hs, worst) {
                return;
            }
            for (l, &h) in hs[..valid].iter().enumerate() {
                if h <= worst {
                    let j = j0 + l;
                    if exclude_self && j == i {
                        continue;
                    }
                    t.push(h, j);
                    worst = t.worst();
                }
            }
        },
        |(_, tops)| {
            tops.into_iter()
                .map(|t| {
                    // Settle by (distance, index) over the k and their near-ties.
                    let mut dd: Vec<f64> = t.h.iter().map(|&h| distance_from_h(kc, h)).collect();
                    let mut jj: Vec<i64> = t.j.iter().map(|&j| j as i64).collect();
                    sort_pairs(&mut dd, &mut jj);
                    (jj, dd)
                })
                .collect::<Vec<_>>()
        },
    );
    for (r, (jj, dd)) in parts.into_iter().flatten().enumerate() {
        idx[r * k..(r + 1) * k].copy_from_slice(&jj[..k]);
        dist[r * k..(r + 1) * k].copy_from_slice(&dd[..k]);
    }
    Ok((idx, dist))
}

/// All rows of `y` within distance `r` of each row of `x` (inclusive), as a
/// CSR triple `(indptr, indices, distances)`, each row sorted by (distance,
/// index). With `exclude_self`, row `i` never lists itself.
pub fn radius_neighbors(
    x: &Prepared,
    y: &Prepared,
    r: f64,
    exclude_self: bool,
) -> Result<(Vec<i64>, Vec<i64>, Vec<f64>)> {
    check_pair(x, y, ("x", "y"))?;
    if !(r >= 0.0) {
        return value_err(format!("r must be a distance >= 0, got {r}"));
    }
    let n = x.n;
    let kc = &x.curvature;
    // h at distance r, with slack: candidates are confirmed by their distance.
    let hr = {
        let s = (r / (2.0 * kc.radius)).sinh();
        s * s * (1.0 + 1e-12) + f64::MIN_POSITIVE
    };
    let parts = sweep(
        x,
        y,
        |rows| (rows.start, rows.map(|_| (Vec::new(), Vec::new())).collect::<Vec<(Vec<i64>, Vec<f64>)>>()),
        #[inline(always)]
        |(r0, rows), i, j0, hs, valid| {
            if !any_at_most(hs, hr) {
                return;
            }
            for (l, &h) in hs[..valid].iter().enumerate() {
                if h <= hr {
                    let j = j0 + l;
                    if exclude_self && j == i {
                        continue;
                    }
                    let d = distance_from_h(kc, h);
                    if d <= r {
                        let row = &mut rows[i - *r0];
                        row.0.push(j as i64);
                        row.1.push(d);
                    }
                }
            }
        },
        |(_, mut rows)| {
            for row in rows.iter_mut() {
                sort_pairs(&mut row.1, &mut row.0);
            }
            rows
        },
    );
    let mut indptr = Vec::with_capacity(n + 1);
    indptr.push(0i64);
    let total: usize = parts.iter().flatten().map(|r| r.0.len()).sum();
    let mut indices = Vec::with_capacity(total);
    let mut dists = Vec::with_capacity(total);
    for (ji, di) in parts.into_iter().flatten() {
        indices.extend_from_slice(&ji);
        dists.extend_from_slice(&di);
        indptr.push(indices.len() as i64);
    }
    Ok((indptr, indices, dists))
}

/// [`sweep`] over all pairs of `x` with itself (`j = i` included), for
/// reductions that keep per-row state (graph reconstruction ranks).
pub fn sweep_self<S, T, I, V, F>(x: &Prepared, init: I, visit: V, finish: F) -> Vec<T>
where
    T: Send,
    I: Fn(std::ops::Range<usize>) -> S + Sync,
    V: Fn(&mut S, usize, usize, &[f64; LANES], usize) + Sync,
    F: Fn(S) -> T + Sync,
{
    sweep(x, x, init, visit, finish)
}

/// Lanes per panel of the tiled kernel (the length of the `hs` arrays that
/// [`sweep_self`] hands out).
pub const PANEL: usize = LANES;
