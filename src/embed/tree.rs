//! The combinatorial tree embedding: Sarkar (2011, "Low distortion Delaunay
//! embedding of trees in hyperbolic plane") in the plane, and its
//! higher-dimensional form with the children of a node on well-separated
//! directions of the sphere (Sala, De Sa, Gu, Ré 2018, "Representation
//! tradeoffs for hyperbolic embeddings").
//!
//! Each node is moved to the origin by the isometry `y -> x ⊕ y`; there its
//! parent lies in some direction `a`, and its children go to the directions
//! of a spherical code of `k + 1` words whose first word is turned onto `a`
//! (the other `k` words are as far from each other and from `a` as the code
//! makes them), at hyperbolic distance `scale`.
//!
//! Exactness. Nodes are built in the hub of `models::convert` (the Poincaré
//! point and its exact gap), at K = -1, parent before child, by Möbius
//! addition `x ⊕ t w` (`t = tanh(scale/2)`, `|w| = 1`), whose result gap
//! `g_x g_b / D` is exact: the radius of every node is known to a few ulps
//! however deep it is, and the child is at distance `scale` from the parent
//! *as stored*, so errors do not accumulate along a path. The frame travels
//! with the nodes: the differential of `y -> x ⊕ y` at 0 is `g_x I` (no
//! rotation), so a direction at `x` is a Euclidean unit vector, and the
//! parent `x` seen from the child `c = x ⊕ b` lies at `⊖c ⊕ x = gyr[x, b](⊖b)`
//! (left gyroassociativity; Ungar 2005), i.e. in direction `-gyr[x, b] w`.
//! The hub points are converted once, at the end, to the requested model.
//! What remains is the last rounding of each coordinate to float64: at a
//! distance `r` from the origin it moves a point by up to about
//! `2^-53 sinh(r)` across the radius (float64 resolves directions to 2^-53
//! rad, in any model), and along it by `2^-53 e^r/2` in the Poincaré ball,
//! `2^-53 e^(2r)/4` in the Klein ball (whose gap is the square of the
//! Poincaré one), `2^-53` on the hyperboloid. So an edge is within 1e-9
//! relative of `scale` while the resolution at its ends is below
//! `1e-9 scale`: up to about `16 + ln(scale)` R from the origin in the
//! Poincaré ball, on the hyperboloid and in the half-space, `8 + ln(scale)/2`
//! R in the Klein ball. No representation in float64 coordinates does better.

use rayon::prelude::*;

use crate::error::{value_err, Result};
use crate::models::ball::{settle, Curvature};
use crate::models::convert::from_hub;
use crate::models::{halfspace, hyperboloid, poincare, Model};
use crate::numeric::{sech2, sumsq, with_scratch};
use crate::stats::centroids::{frechet_group, UnitPoints};
use crate::tree::Tree;

/// The result: points in node order, `n` rows of `width` coordinates.
#[derive(Debug)]
pub struct Embedded {
    pub points: Vec<f64>,
    pub width: usize,
    pub scale: f64,
    /// Whether the deepest node lies within [`accurate_radius`], so that
    /// every edge is `scale` to 1e-9 relative.
    pub accurate: bool,
}

/// How far from the origin (units of R) float64 coordinates of `model` place
/// nodes finely enough that an edge of length `scale` stays within 1e-9
/// relative. Rounding a point at distance `r` moves it about
/// `1e-16 sinh(r)` R across the radius in every model (float64 resolves
/// directions to 1e-16) and along the radius `1e-16 e^r / 2` R in the
/// Poincaré ball, `1e-16 e^(2r) / 4` R in the Klein ball; `1e-16 e^r / 2 <=
/// 1e-9 scale` gives `r <= ln(2e7 scale)`, and Klein's radial term
/// `r <= ln(4e7 scale) / 2`; both are taken with a margin of 10 (both end
/// points round, and a coordinate's rounding is up to 1.1e-16 relative; an
/// edge at exactly `ln(2e7 scale)` was measured 2.3e-9 off). Beyond, siblings
/// closer than 1e-16 rad round to one direction: nodes merge.
pub fn accurate_radius(model: Model, scale: f64) -> f64 {
    let across = (2e6 * scale).ln();
    match model {
        Model::Klein => across.min(0.5 * (4e6 * scale).ln()),
        _ => across,
    }
}

/// The largest distance from the origin (in units of R) at which `model`
/// holds points in float64: the ball models to the last float64 radius
/// below R (`models::ball`'s rim rule: 37.4 R Poincaré, 18.7 R Klein), the
/// hyperboloid to `|x_1..d| = 2^250` and the half-space to coordinates in
/// `2^-250..2^250` (both near 173 R at K = -1), less a margin of 0.5 R.
pub fn max_radius(model: Model, k: &Curvature) -> f64 {
    let range = 250.0 * std::f64::consts::LN_2;
    match model {
        Model::Poincare => 37.4,
        Model::Klein => 18.7,
        Model::Hyperboloid => (2f64.powi(250) * k.sqrt_kappa).asinh() - 0.5,
        Model::HalfSpace => (range - k.radius.ln().abs() - 1.0).max(0.0),
    }
}

fn model_name(m: Model) -> &'static str {
    match m {
        Model::Poincare => "poincare",
        Model::Klein => "klein",
        Model::Hyperboloid => "hyperboloid",
        Model::HalfSpace => "halfspace",
    }
}

/// Distance from the origin (units of R) of the hub point with gap `g`:
/// `cosh(r/2)^2 = 1/g`.
#[inline(always)]
fn radius_of_gap(g: f64) -> f64 {
    2.0 * (1.0 / g.sqrt()).acosh()
}

// ------------------------------------------------------------ the codes

/// splitmix64: the deterministic generator of the starting points.
fn splitmix(s: &mut u64) -> u64 {
    *s = s.wrapping_add(0x9e37_79b9_7f4a_7c15);
    let mut z = *s;
    z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
    z ^ (z >> 31)
}

fn normalize(x: &mut [f64]) {
    let n = sumsq(x).sqrt();
    x.iter_mut().for_each(|v| *v /= n);
}

/// The Fréchet mean (unit ball, with its gap) of the hub points of the nodes
/// `ps`, read at their breadth-first positions `pos` in `p` / `g`.
fn parents_mean(ps: &[u32], pos: &[u32], p: &[f64], g: &[f64], d: usize) -> (Vec<f64>, f64) {
    let mut pts = Vec::with_capacity(ps.len() * d);
    let mut gs = Vec::with_capacity(ps.len());
    for &v in ps {
        let q = pos[v as usize] as usize;
        pts.extend_from_slice(&p[q * d..(q + 1) * d]);
        gs.push(g[q]);
    }
    let up = UnitPoints { n: ps.len(), d, p: std::borrow::Cow::Owned(pts), g: gs };
    let idx: Vec<usize> = (0..ps.len()).collect();
    let r = frechet_group(&up, &idx, None, 1e-12, 50).expect("a non-empty group of points has a mean");
    (r.mu, r.gap)
}

/// `m` unit vectors of R^d (row-major), deterministic, as far apart as the
/// construction gets them; word 0 is the one turned onto the parent.
///
/// * d = 2: the `m` equally spaced directions (optimal).
/// * m <= d + 1: the vertices of a regular simplex (optimal: every angle is
///   `arccos(-1/(m - 1))`).
/// * m <= 2d: the vertices `±e_i` of the cross-polytope (angles >= 90°).
/// * more: pseudo-random Gaussian directions spread by a repulsion whose
///   force falls off as `1/dist^(d+1)` (so each point is pushed mainly by
///   its nearest neighbours, which raises the smallest angle), with a step
///   proportional to the distance to the nearest neighbour and shrinking to
///   zero; the iteration count is capped so the work stays near `4e8`
///   flops per code (none for the largest fan-outs, which keep the Gaussian
///   directions). Synchronous updates: the result depends on `(m, d)` only.
pub fn spherical_code(m: usize, d: usize) -> Vec<f64> {
    let mut c = vec![0.0; m * d];
    if m == 0 {
        return c;
    }
    if d == 2 {
        for j in 0..m {
            // the quarter turns exactly (sin(pi) is 1.2e-16 in float64): a
            // path then stays on its ray, where float64 keeps every digit
            let (x, y) = match (4 * j) % m {
                0 => [(1.0, 0.0), (0.0, 1.0), (-1.0, 0.0), (0.0, -1.0)][4 * j / m],
                _ => {
                    let a = 2.0 * std::f64::consts::PI * j as f64 / m as f64;
                    (a.cos(), a.sin())
                }
            };
            c[2 * j] = x;
            c[2 * j + 1] = y;
        }
        return c;
    }
    if m <= 2 {
        // one word, or two opposite ones, exactly on the first axis
        c[0] = 1.0;
        if m == 2 {
            c[d] = -1.0;
        }
        return c;
    }
    if m <= d + 1 {
        // e_1..e_{m-1} and alpha (1, ..., 1) in R^{m-1}, alpha = (1 - sqrt m)/(m - 1),
        // are equidistant (sqrt 2 apart); centre and normalise.
        let mf = m as f64;
        let alpha = (1.0 - mf.sqrt()) / (mf - 1.0);
        let cen = (1.0 + alpha) / mf;
        for j in 0..m {
            let row = &mut c[j * d..(j + 1) * d];
            for i in 0..m - 1 {
                let v = if j == m - 1 {
                    alpha
                } else if i == j {
                    1.0
                } else {
                    0.0
                };
                row[i] = v - cen;
            }
            normalize(row);
        }
        return c;
    }
    if m <= 2 * d {
        for j in 0..m {
            c[j * d + j / 2] = if j % 2 == 0 { 1.0 } else { -1.0 };
        }
        return c;
    }
    let mut s = (m as u64) << 16 ^ d as u64;
    for v in c.iter_mut() {
        // Box–Muller (one of the pair)
        let u1 = ((splitmix(&mut s) >> 11) as f64 + 0.5) / (1u64 << 53) as f64;
        let u2 = (splitmix(&mut s) >> 11) as f64 / (1u64 << 53) as f64;
        *v = (-2.0 * u1.ln()).sqrt() * (2.0 * std::f64::consts::PI * u2).cos();
    }
    c.chunks_exact_mut(d).for_each(normalize);
    let work = (m * m * d) as f64;
    let iters = ((4e8 / work) as usize).min(60);
    let q = (d + 1) as i32;
    for it in 0..iters {
        let shrink = 1.0 - it as f64 / iters as f64;
        let next: Vec<f64> = (0..m)
            .into_par_iter()
            .flat_map_iter(|i| {
                let xi = &c[i * d..(i + 1) * d];
                let mut f = vec![0.0; d];
                let mut nn = f64::INFINITY;
                for j in 0..m {
                    if j == i {
                        continue;
                    }
                    let xj = &c[j * d..(j + 1) * d];
                    let r2: f64 = xi.iter().zip(xj).map(|(a, b)| (a - b) * (a - b)).sum();
                    nn = nn.min(r2);
                    let w = 1.0 / r2.sqrt().powi(q + 1);
                    for k in 0..d {
                        f[k] += w * (xi[k] - xj[k]);
                    }
                }
                // tangential part of the force
                let fx: f64 = f.iter().zip(xi).map(|(a, b)| a * b).sum();
                f.iter_mut().zip(xi).for_each(|(a, b)| *a -= fx * b);
                let fnorm = sumsq(&f).sqrt();
                let step = if fnorm > 0.0 { 0.25 * shrink * nn.sqrt() / fnorm } else { 0.0 };
                let mut y: Vec<f64> = xi.iter().zip(&f).map(|(a, b)| a + step * b).collect();
                normalize(&mut y);
                y.into_iter()
            })
            .collect();
        c = next;
    }
    c
}

/// The smallest angle between two words of a code (radians).
pub fn min_angle(c: &[f64], d: usize) -> f64 {
    let m = c.len() / d;
    let mut best = std::f64::consts::PI;
    for i in 0..m {
        for j in i + 1..m {
            let dot: f64 = (0..d).map(|k| c[i * d + k] * c[j * d + k]).sum();
            best = best.min(dot.clamp(-1.0, 1.0).acos());
        }
    }
    best
}

// ------------------------------------------------------- the construction

/// Writes `M w` for the orthogonal map `M` that takes `c0` to the unit
/// vector `a`: a Householder reflection about `c0 - a`, or minus the one
/// about `c0 + a`, whichever vector is the longer (|.| >= sqrt 2, so the
/// reflection is well conditioned).
#[inline(always)]
fn turn(c0: &[f64], a: &[f64], w: &[f64], out: &mut [f64]) {
    let ca: f64 = c0.iter().zip(a).map(|(x, y)| x * y).sum();
    let sg = if ca >= 0.0 { 1.0 } else { -1.0 };
    // h = c0 + sg a; H_h c0 = -sg a, so (-sg) H_h takes c0 to a
    let mut hh = 0.0;
    let mut hw = 0.0;
    for i in 0..w.len() {
        let h = c0[i] + sg * a[i];
        hh += h * h;
        hw += h * w[i];
    }
    let f = 2.0 * hw / hh;
    for i in 0..w.len() {
        let h = c0[i] + sg * a[i];
        out[i] = -sg * (w[i] - f * h);
    }
}

/// Embeds `tree` in dimension `dim`. `scale` in units of R (None: the
/// largest with `height * scale <= min(max_radius(model),
/// accurate_radius(model, scale))`).
pub fn embed(tree: &Tree, dim: usize, scale: Option<f64>, model: Model, k: Curvature) -> Result<Embedded> {
    embed_joined(tree, dim, scale, model, k, None)
}

/// Nodes of a tree that also hang below other nodes (a hierarchy with
/// multiple inheritance, [`super::hierarchy`]): node `v`'s parents are
/// `parents[start[v]..start[v + 1]]` (tree node ids, all at smaller depths
/// than `v`), and a node with two or more of them is placed from all of
/// them instead of from its tree parent alone.
pub struct Joins {
    pub start: Vec<u32>,
    pub parents: Vec<u32>,
}

impl Joins {
    fn of(&self, v: usize) -> &[u32] {
        &self.parents[self.start[v] as usize..self.start[v + 1] as usize]
    }
}

/// As [`embed`]; a node `v` with two or more parents in `joins` goes, instead
/// of one edge beyond its tree parent, one edge (`scale`) beyond the Fréchet
/// mean `m` of its parents (hub points, exact gaps), in the direction
/// halfway between the radial one at `m` and the direction the tree would
/// have given it (so that nodes of the same parents do not coincide; the
/// tree's direction alone when `m` is the origin). Its children are spread
/// around the direction back to `m` as usual: its subtree keeps the tree's
/// shape.
pub fn embed_joined(
    tree: &Tree,
    dim: usize,
    scale: Option<f64>,
    model: Model,
    k: Curvature,
    joins: Option<&Joins>,
) -> Result<Embedded> {
    if dim < 2 {
        return value_err(format!("dim must be at least 2, got {dim}"));
    }
    let n = tree.n;
    let d = dim;
    let height = tree.height();
    let rmax = max_radius(model, &k);
    let fits = |s: f64| height as f64 * s <= rmax.min(accurate_radius(model, s));
    // scale=None: the largest scale at which every edge keeps 1e-9 relative
    // (the deepest node within the accurate radius, hence representable);
    // height * s - accurate_radius(s) increases with s there, so bisect.
    let best = if height == 0 {
        1.0
    } else {
        let (mut lo, mut hi) = (0.0f64, rmax / height as f64);
        if fits(hi) {
            lo = hi;
        }
        for _ in 0..200 {
            if hi - lo <= 1e-15 * hi {
                break;
            }
            let mid = 0.5 * (lo + hi);
            if fits(mid) {
                lo = mid;
            } else {
                hi = mid;
            }
        }
        if lo > 0.0 {
            lo
        } else {
            // No scale keeps 1e-9 (height above 2e6/e, about 7.4e5: `h s <=
            // ln(2e6 s)` has no solution): the one where the estimated worst
            // edge error `1e-16 e^(h s) / (2 s)` is smallest, `s = 1/h`
            // (1.5e-10 e h / 1e6 relative), flagged as not accurate.
            (1.0 / height as f64).min(rmax / height as f64)
        }
    };
    let s = match scale {
        None => best,
        Some(s) => {
            if !(s.is_finite() && s > 0.0) {
                return value_err(format!("scale must be a finite positive number, got {s}"));
            }
            let far = height as f64 * s;
            let hyp = max_radius(Model::Hyperboloid, &k);
            if far > hyp {
                // not even the hyperboloid: fail before building anything
                return value_err(format!(
                    "scale = {s}: the deepest node (depth {height}) can lie {far:.4} R from the root, beyond \
                     what any model holds in float64 (the hyperboloid reaches {hyp:.1} R, scale <= {:.6}); \
                     the {} model holds scale <= {:.6} for this tree",
                    hyp / height as f64,
                    model_name(model),
                    rmax / height as f64
                ));
            }
            s
        }
    };
    // ---- hub points in breadth-first order, at K = -1
    let one = Curvature::default();
    let t = (0.5 * s).tanh();
    let gb = sech2(0.5 * s);
    let mut pos = vec![0u32; n];
    for (q, &v) in tree.bfs.iter().enumerate() {
        pos[v as usize] = q as u32;
    }
    // the codes needed: k + 1 words below a node with k children and a
    // parent, k at the root
    let mut sizes: Vec<usize> =
        (0..n).filter(|&v| tree.degree(v) > 0).map(|v| tree.degree(v) + usize::from(v != tree.root)).collect();
    sizes.sort_unstable();
    sizes.dedup();
    let built: Vec<(usize, Vec<f64>)> = sizes.par_iter().map(|&m| (m, spherical_code(m, d))).collect();
    let mut codes: Vec<Vec<f64>> = vec![Vec::new(); sizes.last().map_or(0, |&m| m + 1)];
    for (m, c) in built {
        codes[m] = c;
    }

    let mut hp = vec![0.0f64; n * d];
    let mut hg = vec![1.0f64; n];
    let mut dir = vec![0.0f64; n * d];
    let levels = tree.level_start.len() - 1;
    for l in 1..levels {
        let (lo, hi) = (tree.level_start[l] as usize, tree.level_start[l + 1] as usize);
        let (done_p, rest_p) = hp.split_at_mut(lo * d);
        let (done_g, rest_g) = hg.split_at_mut(lo);
        let (done_a, rest_a) = dir.split_at_mut(lo * d);
        let (cur_p, cur_g, cur_a) =
            (&mut rest_p[..(hi - lo) * d], &mut rest_g[..hi - lo], &mut rest_a[..(hi - lo) * d]);
        let place = |q: usize, p_out: &mut [f64], g_out: &mut f64, a_out: &mut [f64]| {
            // everything read in breadth-first positions: near-sequential
            let qp = tree.bfs_parent[q] as usize;
            let first = tree.bfs_child[qp] as usize;
            let has_parent = usize::from(qp != 0);
            let m = (tree.bfs_child[qp + 1] as usize - first) + has_parent;
            let code = &codes[m];
            let word = q - first + has_parent;
            let cw = &code[word * d..(word + 1) * d];
            let xp = &done_p[qp * d..(qp + 1) * d];
            let gp = done_g[qp];
            with_scratch(2 * d, |buf| {
                let (w, b) = buf.split_at_mut(d);
                if has_parent == 1 {
                    turn(&code[..d], &done_a[qp * d..(qp + 1) * d], cw, w);
                    normalize(w);
                } else {
                    w.copy_from_slice(cw);
                }
                let joined = joins.map(|j| j.of(tree.bfs[q] as usize)).filter(|ps| ps.len() > 1);
                let mean = joined.map(|ps| {
                    // from the Fréchet mean m of the parents: radially
                    // outward, tilted towards the tree's direction w (so
                    // that nodes of the same parents do not coincide)
                    let (m, gm) = parents_mean(ps, &pos, done_p, done_g, d);
                    let rm = sumsq(&m).sqrt();
                    if rm > 0.0 {
                        w.iter_mut().zip(&m).for_each(|(wi, mi)| *wi += mi / rm);
                        if sumsq(w) > 0.0 {
                            normalize(w);
                        } else {
                            w.iter_mut().zip(&m).for_each(|(wi, mi)| *wi = mi / rm);
                        }
                    }
                    (m, gm)
                });
                let (xp, gp) = match &mean {
                    None => (xp, gp),
                    Some((m, gm)) => (&m[..], *gm),
                };
                for i in 0..d {
                    b[i] = t * w[i];
                }
                *g_out = poincare::add_g(&one, xp, gp, b, gb, 1.0, p_out);
                if tree.bfs_child[q + 1] > tree.bfs_child[q] {
                    poincare::gyration_g(&one, xp, gp, b, gb, w, a_out);
                    a_out.iter_mut().for_each(|x| *x = -*x);
                    normalize(a_out);
                }
            });
        };
        if hi - lo >= 512 {
            cur_p
                .par_chunks_mut(64 * d)
                .zip(cur_g.par_chunks_mut(64))
                .zip(cur_a.par_chunks_mut(64 * d))
                .enumerate()
                .for_each(|(ci, ((pc, gc), ac))| {
                    for (r, g) in gc.iter_mut().enumerate() {
                        let q = lo + ci * 64 + r;
                        place(q, &mut pc[r * d..(r + 1) * d], g, &mut ac[r * d..(r + 1) * d]);
                    }
                });
        } else {
            for (r, g) in cur_g.iter_mut().enumerate() {
                place(lo + r, &mut cur_p[r * d..(r + 1) * d], g, &mut cur_a[r * d..(r + 1) * d]);
            }
        }
    }
    // ---- every node within the model's range?
    let (qmin, gmin) = hg.iter().enumerate().fold((0, 1.0), |acc, (q, &g)| if g < acc.1 { (q, g) } else { acc });
    let far = radius_of_gap(gmin);
    if far > rmax {
        let v = tree.bfs[qmin];
        let hyp = max_radius(Model::Hyperboloid, &k);
        let other = if model != Model::Hyperboloid && far <= hyp {
            format!("; the hyperboloid model holds it (model='hyperboloid', up to {hyp:.1} R)")
        } else {
            String::new()
        };
        return value_err(format!(
            "scale = {s} does not fit the {} model: node {v} (depth {}) lies {far:.4} R from the root, beyond the \
             {rmax:.1} R that the {} model holds in float64{other}; scale <= {:.6} fits this tree in it \
             (depth {height} x scale <= {rmax:.1} R; scale=None picks {best:.6}, the largest that keeps every \
             edge to 1e-9)",
            model_name(model),
            tree.depth[v as usize],
            model_name(model),
            rmax / height.max(1) as f64
        ));
    }
    // ---- once, to the requested model, in node order
    let width = model.width(d);
    // the directions' buffer becomes the output (every entry is written
    // below): one n x d allocation fewer, whose fresh pages the kernel would
    // zero again (page clearing was over half the time at n = 1e6, d = 10)
    let mut points = dir;
    points.resize(n * width, 0.0);
    let bad = points
        .par_chunks_mut(width)
        .enumerate()
        .map(|(v, out)| {
            let q = pos[v] as usize;
            let g = hg[q];
            let ok = with_scratch(d, |p| {
                for i in 0..d {
                    p[i] = k.radius * hp[q * d + i];
                }
                let g_out = from_hub(model, &k, p, g, out);
                match model {
                    Model::Poincare | Model::Klein => settle(&k, out, g_out, false),
                    Model::Hyperboloid => {
                        out.iter().all(|x| x.is_finite()) && sumsq(&out[1..]) <= hyperboloid::MAX_SPATIAL_SQ
                    }
                    Model::HalfSpace => halfspace::read_point(out).is_ok(),
                }
            });
            if ok {
                usize::MAX
            } else {
                v
            }
        })
        .min()
        .unwrap_or(usize::MAX);
    if bad != usize::MAX {
        return value_err(format!(
            "scale = {s}: node {bad} lies {:.4} R from the root, where the {} model cannot hold it in float64",
            radius_of_gap(hg[pos[bad] as usize]),
            model_name(model)
        ));
    }
    // a tree's deepest node may lie up to height * s out; nodes placed from
    // several parents lie closer in, so there the farthest one placed counts
    let reach = if joins.is_some() { far } else { height as f64 * s };
    let accurate = reach <= accurate_radius(model, s);
    Ok(Embedded { points, width, scale: s, accurate })
}

/// The hub gaps in node order (for tests of the exact radii).
pub fn hub_radius(g: f64) -> f64 {
    radius_of_gap(g)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::pairwise::point_distance;

    fn random_tree(n: usize, seed: u64) -> Vec<i64> {
        let mut s = seed;
        let mut p = vec![-1i64];
        for i in 1..n as i64 {
            p.push((splitmix(&mut s) % i as u64) as i64);
        }
        p
    }

    #[test]
    fn codes_are_unit_and_separated() {
        // regular simplex: every angle arccos(-1/(m - 1)) (handbook: Conway & Sloane)
        let c = spherical_code(5, 10);
        let want = (-1.0f64 / 4.0).acos();
        assert!((min_angle(&c, 10) - want).abs() < 1e-12);
        assert!((min_angle(&spherical_code(7, 2), 2) - 2.0 * std::f64::consts::PI / 7.0).abs() < 1e-12);
        assert!((min_angle(&spherical_code(15, 10), 10) - std::f64::consts::FRAC_PI_2).abs() < 1e-12);
        for (m, d) in [(50, 3), (200, 10), (40, 5)] {
            let c = spherical_code(m, d);
            for r in c.chunks_exact(d) {
                assert!((sumsq(r) - 1.0).abs() < 1e-12);
            }
            // the repulsion beats the Gaussian start it came from (common practice)
            let mut s = (m as u64) << 16 ^ d as u64;
            let mut g: Vec<f64> = (0..m * d)
                .map(|_| {
                    let u1 = ((splitmix(&mut s) >> 11) as f64 + 0.5) / (1u64 << 53) as f64;
                    let u2 = (splitmix(&mut s) >> 11) as f64 / (1u64 << 53) as f64;
                    (-2.0 * u1.ln()).sqrt() * (2.0 * std::f64::consts::PI * u2).cos()
                })
                .collect();
            g.chunks_exact_mut(d).for_each(normalize);
            assert!(min_angle(&c, d) > 1.5 * min_angle(&g, d), "{m} {d}: {} vs {}", min_angle(&c, d), min_angle(&g, d));
        }
    }

    #[test]
    fn every_edge_has_length_scale() {
        let k = Curvature::default();
        for (dim, seed) in [(2, 1), (3, 2), (10, 3)] {
            let tree = Tree::from_parents(&random_tree(2000, seed)).unwrap();
            for model in [Model::Poincare, Model::Klein, Model::Hyperboloid, Model::HalfSpace] {
                let s = 1.3;
                let e = embed(&tree, dim, Some(s), model, k).unwrap();
                let w = e.width;
                for v in 0..tree.n {
                    if v == tree.root {
                        continue;
                    }
                    let p = tree.parent[v] as usize;
                    let dd = point_distance(model, &k, &e.points[v * w..(v + 1) * w], &e.points[p * w..(p + 1) * w])
                        .unwrap();
                    // edge length == scale; the radius here keeps 2^-52 sinh(r) far below 1e-9 s
                    let r = tree.depth[v] as f64 * s;
                    let res = if model == Model::Klein { (2.0 * r).exp() / 4.0 } else { r.sinh() };
                    let tol = 1e-13 + 4.0 * f64::EPSILON * res;
                    assert!((dd - s).abs() <= tol * s, "{model:?} d={dim} node {v}: {dd} vs {s}");
                }
            }
        }
    }

    #[test]
    fn scale_none_fits_and_an_explicit_scale_that_does_not_says_which_model() {
        let k = Curvature::default();
        let path: Vec<i64> = (0..11).map(|i| i - 1).collect();
        let tree = Tree::from_parents(&path).unwrap();
        let e = embed(&tree, 2, None, Model::Poincare, k).unwrap();
        // the deepest node at the accurate radius: 10 s = ln(2e6 s)
        assert!((10.0 * e.scale - accurate_radius(Model::Poincare, e.scale)).abs() < 1e-12, "{}", e.scale);
        assert!(e.accurate && e.scale > 1.45 && e.scale < 1.55, "{}", e.scale);
        let e = embed(&tree, 2, Some(4.0), Model::Poincare, k).unwrap_err().to_string();
        assert!(e.contains("node 10") && e.contains("hyperboloid"), "{e}");
        assert!(embed(&tree, 2, Some(4.0), Model::Hyperboloid, k).is_ok());
        let e = embed(&tree, 2, Some(40.0), Model::Hyperboloid, k).unwrap_err().to_string();
        assert!(e.contains("beyond what any model holds"), "{e}");
    }

    #[test]
    fn scale_none_for_a_tree_too_deep_for_any_accurate_scale_is_one_over_the_height() {
        // height 799 999 > 2e6/e: no scale keeps 1e-9 (was: scale 0, every
        // node at the root); the error estimate e^(h s) / s is smallest at 1/h
        let k = Curvature::default();
        let path: Vec<i64> = (0..800_000).map(|i| i - 1).collect();
        let tree = Tree::from_parents(&path).unwrap();
        let e = embed(&tree, 2, None, Model::Hyperboloid, k).unwrap();
        assert_eq!(e.scale, 1.0 / 799_999.0);
        assert!(!e.accurate);
        // the last edge: hub points on a line, distances from the origin
        let w = e.width;
        let r = |i: usize| e.points[i * w + 1].hypot(e.points[i * w + 2]).asinh();
        let last = r(799_999) - r(799_998);
        assert!((last / e.scale - 1.0).abs() < 1e-9, "{last}");
    }
}
