//! Centroids from partial sums: the Einstein start and the Newton iteration
//! of [`super::centroids`] written as a state machine that asks for sums
//! over the points and is fed them. The in-memory functions feed it sums
//! over all members at once; a distributed caller (gyrokit.dask) feeds it
//! the sums of each chunk of the data, computed where the chunk lives by
//! [`chunk_sums`], in a fixed order. The iteration is the same code either
//! way, so the two agree up to the rounding of the sums' grouping.

use crate::batch::Data;
use crate::error::{Error, Result};
use crate::models::ball::Curvature;
use crate::models::poincare;
use crate::models::Model;

use super::centroids::{einstein_point, einstein_sums, stats, unit_points, weight_factor, GroupMean, Newton, Stats};

/// A point of the unit ball with its exact gap.
pub type Hub = (Vec<f64>, f64);

/// The sums a driver needs next.
#[derive(Clone, Debug, PartialEq)]
pub enum Query {
    /// Einstein sums of the members, translated by `-c` when a centre is given.
    Einstein(Option<Hub>),
    /// Newton statistics at `mu` (gradient, Hessian, objective).
    Stats(Hub),
}

/// Sums of some of the members answering a [`Query`].
#[derive(Clone)]
pub enum Sums {
    /// `(sum w 2p'/g', sum w (2 - g')/g')` and the first member of positive
    /// weight in input order (needed when the direct estimate has rounded
    /// onto the sphere).
    Einstein {
        num: Vec<f64>,
        den: f64,
        first: Option<Hub>,
    },
    Stats(Stats),
}

impl Sums {
    /// The sums of no members.
    pub fn zero(q: &Query, d: usize) -> Sums {
        match q {
            Query::Einstein(_) => Sums::Einstein { num: vec![0f64; d], den: 0.0, first: None },
            Query::Stats(_) => Sums::Stats(Stats::zero(d)),
        }
    }

    /// Adds the sums of later members (callers add in input order).
    pub fn add(&mut self, o: &Sums) {
        match (self, o) {
            (Sums::Einstein { num, den, first }, Sums::Einstein { num: n2, den: d2, first: f2 }) => {
                num.iter_mut().zip(n2).for_each(|(a, b)| *a += b);
                *den += d2;
                if first.is_none() {
                    first.clone_from(f2);
                }
            }
            (Sums::Stats(a), Sums::Stats(b)) => a.add(b),
            _ => panic!("sums of different queries"),
        }
    }
}

enum Phase {
    /// The direct Einstein sums.
    Direct,
    /// Translated Einstein sums about `centre` (rounds from 0).
    Translated {
        round: usize,
        centre: Hub,
    },
    Newton(Box<Newton>),
    Done(Option<GroupMean>),
}

/// One group's centroid: the Einstein midpoint alone (`newton = false`) or
/// the Fréchet mean started there.
pub struct Driver {
    phase: Phase,
    first: Option<Hub>,
    newton: Option<(f64, usize)>,
}

impl Driver {
    /// `newton`: `Some((tol, max_iter))` for the Fréchet mean, `None` for the
    /// Einstein midpoint.
    pub fn new(newton: Option<(f64, usize)>) -> Driver {
        Driver { phase: Phase::Direct, first: None, newton }
    }

    /// A driver already in Newton's iteration at `nt`'s starting point (the
    /// warm start of k-means' intermediate centres). A group whose
    /// statistics have no weight ends without a result.
    #[cfg_attr(not(feature = "python"), allow(dead_code))] // called by the pyo3 layer only
    pub(crate) fn from_newton(nt: Newton) -> Driver {
        Driver { phase: Phase::Newton(Box::new(nt)), first: None, newton: None }
    }

    /// What the driver needs next; `None` when done.
    pub fn query(&self) -> Option<Query> {
        match &self.phase {
            Phase::Direct => Some(Query::Einstein(None)),
            Phase::Translated { centre, .. } => Some(Query::Einstein(Some(centre.clone()))),
            Phase::Newton(nt) => Some(Query::Stats((nt.mu.clone(), nt.gmu))),
            Phase::Done(_) => None,
        }
    }

    /// The result once done: `None` for a group without positive weight. For
    /// the Einstein midpoint only `mu` and `gap` are meaningful.
    pub fn result(&self) -> Option<&GroupMean> {
        match &self.phase {
            Phase::Done(r) => r.as_ref(),
            _ => None,
        }
    }

    pub fn is_done(&self) -> bool {
        matches!(self.phase, Phase::Done(_))
    }

    fn start(&mut self, mu: Vec<f64>, gmu: f64) {
        self.phase = match self.newton {
            Some((tol, max_iter)) => Phase::Newton(Box::new(Newton::new(mu, gmu, tol, max_iter, 0.0))),
            None => Phase::Done(Some(GroupMean {
                mu,
                gap: gmu,
                iterations: 0,
                converged: true,
                grad_norm: f64::NAN,
                var: f64::NAN,
            })),
        };
    }

    /// The centre of the next translated round: the estimate as an exact
    /// point with the gap of its rounded coordinates, or, where it rounded
    /// onto the sphere, the first member.
    fn centre(&self, est: Vec<f64>) -> Option<Hub> {
        let gm = crate::numeric::gap_dd(1.0, &est).value();
        if gm > 0.0 && est.iter().all(|v| v.is_finite()) {
            Some((est, gm))
        } else {
            self.first.clone()
        }
    }

    /// Feeds the sums over all members answering [`Driver::query`].
    ///
    /// The Einstein midpoint of the sums of one round, `m` in the frame of
    /// the round's centre `c` (the origin for the direct sums), is accurate
    /// where its Klein gap `1 - |m_K|^2` is well above the rounding of the
    /// sums: that gap is a difference of nearly equal numbers, so it keeps
    /// `eps / gap` relative accuracy. Per round:
    ///
    /// * Poincaré gap of `m` above 1/2 (Klein gap above 1/9): `c ⊕ m` is
    ///   the midpoint (Möbius addition with exact gaps; `c ⊕ 0 = c`
    ///   exactly, so a group of one point returns that point).
    /// * Klein gap above [`TRUSTED_KLEIN_GAP`]: `m` is within a relative
    ///   `eps / gap` of the midpoint, and the next round is translated by
    ///   `c ⊕ m`, where the midpoint is near the origin.
    /// * Below: only the direction of `m` is known. From the direct sums the
    ///   next round is translated by the first member (members packed near
    ///   the rim are then near the origin); in a translated frame, by the
    ///   point along that direction whose Klein gap is `TRUSTED_KLEIN_GAP`
    ///   (hyperbolic distance about 9.9 from the frame's origin), which lies
    ///   between `c` and the midpoint, so every such round moves the centre
    ///   about 9.9 closer to it (points of float64 coordinates lie within
    ///   about 38 of the origin, their exact gaps carried through the
    ///   translations: a few rounds at most).
    pub fn feed(&mut self, s: Sums) {
        let phase = std::mem::replace(&mut self.phase, Phase::Done(None));
        let unit = Curvature::default();
        match (phase, s) {
            (Phase::Direct, Sums::Einstein { num, den, first }) => {
                self.first = first;
                if !(den > 0.0) {
                    return;
                }
                let (m, g) = einstein_point(num, den);
                if g > 0.5 {
                    return self.start(m, g);
                }
                let next = if g >= TRUSTED_GAP { self.centre(m) } else { self.first.clone() };
                if let Some(centre) = next {
                    self.phase = Phase::Translated { round: 0, centre };
                }
            }
            (Phase::Translated { round, centre }, Sums::Einstein { num, den, .. }) => {
                let (m2, g2) = einstein_point(num, den);
                let mut out = vec![0f64; m2.len()];
                if g2 > 0.5 || round + 1 >= MAX_ROUNDS {
                    let g = if m2.iter().all(|&v| v == 0.0) {
                        out.copy_from_slice(&centre.0);
                        centre.1
                    } else {
                        poincare::add_g(&unit, &centre.0, centre.1, &m2, g2, 1.0, &mut out)
                    };
                    return self.start(out, g);
                }
                // (the next centre's gap is taken from its rounded coordinates)
                if g2 >= TRUSTED_GAP {
                    poincare::add_g(&unit, &centre.0, centre.1, &m2, g2, 1.0, &mut out);
                } else {
                    // The point of Klein gap TRUSTED_KLEIN_GAP along m2.
                    let n = crate::numeric::sumsq(&m2).sqrt();
                    let a = TRUSTED_KLEIN_GAP.sqrt();
                    let r = (1.0 - TRUSTED_KLEIN_GAP).sqrt() / (1.0 + a);
                    let s: Vec<f64> = m2.iter().map(|v| v / n * r).collect();
                    let gs = crate::numeric::gap_dd(1.0, &s).value();
                    poincare::add_g(&unit, &centre.0, centre.1, &s, gs, 1.0, &mut out);
                }
                if let Some(c) = self.centre(out) {
                    self.phase = Phase::Translated { round: round + 1, centre: c };
                }
            }
            (Phase::Newton(mut nt), Sums::Stats(st)) => {
                if !(st.wsum > 0.0) {
                    // No members (a warm-started k-means centre whose cluster
                    // emptied): no result, the caller keeps the centre.
                    return;
                }
                if nt.advance(&st) {
                    self.phase = Phase::Newton(nt);
                } else {
                    self.phase = Phase::Done(nt.result.take());
                }
            }
            _ => panic!("sums do not answer the driver's query"),
        }
    }
}

/// The Klein gap `1 - |m_K|^2` above which a round's estimate is taken as
/// the next centre (relative accuracy about `eps / 1e-8`).
const TRUSTED_KLEIN_GAP: f64 = 1e-8;
/// The Poincaré gap `2a / (1 + a)`, `a = sqrt(TRUSTED_KLEIN_GAP)`, of the same points.
const TRUSTED_GAP: f64 = 2e-4 / (1.0 + 1e-4);
/// Translated rounds at most (each moves the centre about 9.9 closer to the
/// midpoint, or ends; points lie within about 38 of the origin).
const MAX_ROUNDS: usize = 12;

/// Runs a driver to the end on in-memory members.
pub(crate) fn run(
    pts: &super::centroids::UnitPoints,
    idx: &[usize],
    w: Option<&[f64]>,
    newton: Option<(f64, usize)>,
) -> Option<GroupMean> {
    let mut dr = Driver::new(newton);
    while let Some(q) = dr.query() {
        dr.feed(member_sums(pts, idx, w, &q));
    }
    match dr.phase {
        Phase::Done(r) => r,
        _ => unreachable!(),
    }
}

/// The sums of the members `idx` answering `q`.
fn member_sums(pts: &super::centroids::UnitPoints, idx: &[usize], w: Option<&[f64]>, q: &Query) -> Sums {
    match q {
        Query::Einstein(c) => {
            let (num, den) = einstein_sums(pts, idx, w, c.as_ref().map(|(v, g)| (v.as_slice(), *g)));
            let first = match c {
                None => idx.iter().find(|&&i| w.map_or(1.0, |w| w[i]) > 0.0).map(|&i| {
                    let d = pts.d;
                    (pts.p[i * d..(i + 1) * d].to_vec(), pts.g[i])
                }),
                Some(_) => None,
            };
            Sums::Einstein { num, den, first }
        }
        Query::Stats((mu, gmu)) => Sums::Stats(stats(pts, idx, w, mu, *gmu)),
    }
}

/// The sums of one chunk of the data for every group's query.
///
/// `codes` are the chunk's group numbers in `0..queries.len()` (`None`: one
/// group). `wmax` is the largest weight of the whole data set (weights are
/// scaled by the power of two the in-memory functions use, so sums of all
/// chunks equal the in-memory sums up to grouping). Rows in errors are rows
/// of the chunk.
pub fn chunk_sums(
    model: Model,
    k: &Curvature,
    x: &Data,
    weights: Option<&[f64]>,
    wmax: f64,
    codes: Option<&[i64]>,
    queries: &[Option<Query>],
) -> Result<Vec<Option<Sums>>> {
    let pts = unit_points(model, k, "x", x)?;
    let w: Option<Vec<f64>> = match weights {
        Some(w) => {
            super::centroids::check_weights(w, pts.n)?;
            let f = weight_factor(wmax);
            Some(w.iter().map(|v| v * f).collect())
        }
        None => None,
    };
    let g = queries.len();
    let mut members: Vec<Vec<usize>> = vec![Vec::new(); g];
    match codes {
        None => {
            if g != 1 {
                return Err(Error::Value(format!("{g} queries but no labels")));
            }
            members[0] = (0..pts.n).collect();
        }
        Some(c) => {
            if c.len() != pts.n {
                return Err(Error::Value(format!("labels has length {} but x has {} points", c.len(), pts.n)));
            }
            for (i, &l) in c.iter().enumerate() {
                if l < 0 || l as usize >= g {
                    return Err(Error::Value(format!("labels: entry {i} is {l}, not a group number below {g}")));
                }
                members[l as usize].push(i);
            }
        }
    }
    for q in queries.iter().flatten() {
        let (Query::Einstein(Some((mu, _))) | Query::Stats((mu, _))) = q else { continue };
        if mu.len() != pts.d {
            return Err(Error::Value(format!("a query point has {} coordinates, x has {}", mu.len(), pts.d)));
        }
    }
    use rayon::prelude::*;
    Ok(queries
        .par_iter()
        .zip(members.par_iter())
        .map(|(q, idx)| q.as_ref().map(|q| member_sums(&pts, idx, w.as_deref(), q)))
        .collect())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::stats::centroids::frechet_mean;

    /// Runs the driver on chunk sums of the given chunk length, as a
    /// distributed caller does.
    fn chunked(x: &[f64], d: usize, w: Option<&[f64]>, len: usize) -> GroupMean {
        let k = Curvature::default();
        let mut dr = Driver::new(Some((1e-12, 50)));
        let wmax = w.map_or(1.0, |w| w.iter().fold(0.0f64, |a, &b| a.max(b)));
        while let Some(q) = dr.query() {
            let mut tot: Option<Sums> = None;
            for (c, xc) in x.chunks(len * d).enumerate() {
                let a = ndarray::ArrayView2::from_shape((xc.len() / d, d), xc).unwrap().into_dyn();
                let wc = w.map(|w| &w[c * len..c * len + xc.len() / d]);
                let s = chunk_sums(Model::Poincare, &k, &Data::F64(a), wc, wmax, None, &[Some(q.clone())]).unwrap();
                let s = s.into_iter().next().unwrap().unwrap();
                match &mut tot {
                    Some(t) => t.add(&s),
                    None => tot = Some(s),
                }
            }
            dr.feed(tot.unwrap());
        }
        dr.result().unwrap().clone_mean()
    }

    impl GroupMean {
        fn clone_mean(&self) -> GroupMean {
            GroupMean { mu: self.mu.clone(), ..*self }
        }
    }

    #[test]
    fn chunk_sums_give_the_in_memory_mean() {
        let (n, d) = (5000, 3);
        for (rmax, seed) in [(3.0, 1), (30.0, 2)] {
            let x = crate::stats::test_ball(n, d, rmax, seed);
            let w: Vec<f64> = (0..n).map(|i| ((i * 7919) % 13) as f64 * 0.25).collect();
            let a = ndarray::ArrayView2::from_shape((n, d), &x[..]).unwrap().into_dyn();
            let whole =
                frechet_mean(Model::Poincare, Curvature::default(), &Data::F64(a), Some(&w), None, 1e-12, 50).unwrap();
            for len in [n, 1, 777, 2048] {
                let got = chunked(&x, d, Some(&w), len);
                let mut g = vec![0f64; d];
                super::super::centroids::to_model(Model::Poincare, &Curvature::default(), &got.mu, got.gap, &mut g);
                // One chunk: the same sums in the same order, the same bits.
                if len == n {
                    assert_eq!(g, whole.mean, "rmax {rmax}");
                }
                let dist =
                    crate::pairwise::point_distance(Model::Poincare, &Curvature::default(), &g, &whole.mean).unwrap();
                assert!(dist <= 1e-13, "rmax {rmax}, chunks of {len}: {dist:e}");
                assert!(got.converged);
            }
        }
    }
}
