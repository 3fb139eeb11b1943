//! Distortion of an embedding's distances against target distances.
//!
//! With `r = d/t` per pair (`d` the embedding distance, `t > 0` the target)
//! and a scale `s`:
//! * mean distortion `(1/p) sum |d/s - t|/t = (1/p) sum |r/s - 1|`;
//! * worst-case distortion `max(d/(s t)) max(s t/d) = max r / min r`
//!   (independent of `s`; infinite when some `d = 0`).
//!
//! The fitted scale minimises the mean: with `u = 1/s`,
//! `sum |u r - 1| = sum r |u - 1/r|` is convex and piecewise linear in `u`,
//! minimised at a weighted median of the `1/r` with weights `r`, i.e. at
//! `s` = the weighted median of the `r` with weights `r`: the smallest
//! `r_(k)` (ascending) whose cumulative weight `r_(1) + ... + r_(k)` reaches
//! half the total (then neither side of `s` carries more than half). The
//! sums are double-double, so the comparison is exact up to ~1e-32 of the
//! total; where the cumulative weight equals half the total exactly, every
//! `s` in `[r_(k), r_(k+1)]` is a minimiser and `r_(k)` is returned.
//! Pairs with `d = 0` (weight 0) do not move the minimiser; if every pair
//! has `d = 0` the scale is 1 (every scale gives the mean 1).
//!
//! Distances are the library's own (`Prepared::distance`, bit-identical to
//! the matrix and element-wise paths). Memory: one float64 per pair when the
//! scale is fitted (the sort), none beyond the inputs otherwise.

use ndarray::ArrayView2;
use rayon::prelude::*;

use crate::error::{Error, Result};
use crate::numeric::{two_sum, DD};
use crate::pairwise::Prepared;

/// The target distances.
pub enum Target<'a> {
    /// A full `(n, n)` matrix: symmetric (to 1e-12 relative), zero
    /// diagonal, every pair `i < j` counted once.
    Matrix(ArrayView2<'a, f64>),
    /// `(p, 2)` point pairs (row-major) and their `p` target distances.
    Pairs(&'a [i64], &'a [f64]),
}

/// The scores of one comparison.
#[derive(Clone, Debug, PartialEq)]
pub struct Distortion {
    pub mean: f64,
    pub worst: f64,
    pub scale: f64,
    pub pairs: usize,
}

/// Rows per parallel task.
const CHUNK: usize = 64;

fn check_target(i: usize, j: usize, t: f64) -> Result<()> {
    if !t.is_finite() || t < 0.0 {
        return Err(Error::Value(format!("target row {i}: target[{i}, {j}] = {t} is not a finite distance >= 0")));
    }
    if t == 0.0 {
        return Err(Error::Value(format!(
            "target row {i}: target[{i}, {j}] = 0 for two distinct points; the relative distortion of a \
             zero distance is undefined (merge duplicated items, or pass the other pairs with pairs=)"
        )));
    }
    Ok(())
}

/// Validates a full target matrix (every row, in parallel; the first bad
/// row is reported).
fn check_matrix(n: usize, t: &ArrayView2<f64>) -> Result<()> {
    if t.shape() != [n, n] {
        return Err(Error::Value(format!(
            "target must have shape ({n}, {n}) to match x, or be 1-D with pairs=; got shape {:?}",
            t.shape()
        )));
    }
    let first = (0..n)
        .into_par_iter()
        .with_min_len(CHUNK)
        .map(|i| -> Result<()> {
            let d = t[[i, i]];
            if d != 0.0 {
                return Err(Error::Value(format!("target row {i}: target[{i}, {i}] = {d}; the diagonal must be 0")));
            }
            for j in 0..n {
                if j == i {
                    continue;
                }
                let (a, b) = (t[[i, j]], t[[j, i]]);
                check_target(i, j, a)?;
                if (a - b).abs() > 1e-12 * a.max(b) || b.is_nan() {
                    return Err(Error::Value(format!(
                        "target row {i}: not symmetric: target[{i}, {j}] = {a} but target[{j}, {i}] = {b}"
                    )));
                }
            }
            Ok(())
        })
        .find_first(|r| r.is_err());
    first.unwrap_or(Ok(()))
}

fn check_pairs(n: usize, pairs: &[i64], t: &[f64]) -> Result<()> {
    if pairs.len() != 2 * t.len() {
        return Err(Error::Value(format!(
            "pairs must have shape (p, 2) with p = len(target) = {}; got {} values",
            t.len(),
            pairs.len()
        )));
    }
    for (r, (e, &tv)) in pairs.chunks_exact(2).zip(t).enumerate() {
        for &v in e {
            if v < 0 || v as u64 >= n as u64 {
                return Err(Error::Value(format!(
                    "pairs row {r}: ({}, {}) names point {v}, out of range for {n} points",
                    e[0], e[1]
                )));
            }
        }
        if e[0] == e[1] {
            return Err(Error::Value(format!("pairs row {r}: ({}, {}) pairs a point with itself", e[0], e[1])));
        }
        if !tv.is_finite() || tv <= 0.0 {
            return Err(Error::Value(format!(
                "target row {r}: {tv} for pair ({}, {}) is not a finite distance > 0{}",
                e[0],
                e[1],
                if tv == 0.0 { " (the relative distortion of a zero distance is undefined)" } else { "" }
            )));
        }
    }
    Ok(())
}

/// The ratios `d/t`, in pair order (row-major upper triangle for a matrix).
fn ratios(x: &Prepared, target: &Target) -> Vec<f64> {
    match target {
        Target::Matrix(t) => {
            let n = x.n;
            let rows: Vec<Vec<f64>> = (0..n)
                .into_par_iter()
                .with_min_len(CHUNK)
                .map(|i| (i + 1..n).map(|j| x.distance(i, x, j) / t[[i, j]]).collect())
                .collect();
            rows.concat()
        }
        Target::Pairs(p, t) => p
            .par_chunks_exact(2)
            .zip(t.par_iter())
            .with_min_len(4096)
            .map(|(e, &tv)| x.distance(e[0] as usize, x, e[1] as usize) / tv)
            .collect(),
    }
}

/// Double-double sum of `f(v)` over `v`, in fixed chunks combined in order
/// (independent of the thread count).
fn sum_dd(v: &[f64], f: impl Fn(f64) -> f64 + Sync) -> f64 {
    let parts: Vec<DD> = v
        .par_chunks(1 << 14)
        .map(|c| {
            let mut acc = DD::from(0.0);
            for &x in c {
                acc = acc.add(DD::from(f(x)));
            }
            acc
        })
        .collect();
    parts.into_iter().fold(DD::from(0.0), |a, b| a.add(b)).value()
}

/// The weighted median of `r` with weights `r` (see the module notes);
/// sorts `r`.
fn fitted_scale(r: &mut [f64]) -> f64 {
    r.par_sort_unstable_by(|a, b| a.total_cmp(b));
    let mut total = DD::from(0.0);
    for &v in r.iter() {
        total = total.add(DD::from(v));
    }
    if total.value() == 0.0 {
        return 1.0;
    }
    let half = DD::new(total.hi * 0.5, total.lo * 0.5);
    let mut cum = DD::from(0.0);
    for &v in r.iter() {
        cum = cum.add(DD::from(v));
        let (d, e) = two_sum(cum.hi, -half.hi);
        if d + (e + (cum.lo - half.lo)) >= 0.0 {
            return v;
        }
    }
    // Unreachable in exact arithmetic (the full sum reaches the half); the
    // largest ratio is then the answer.
    r[r.len() - 1]
}

/// Distortion of the distances of `x` against `target`; `scale` None fits
/// it (see the module notes).
pub fn distortion(x: &Prepared, target: &Target, scale: Option<f64>) -> Result<Distortion> {
    match target {
        Target::Matrix(t) => check_matrix(x.n, t)?,
        Target::Pairs(p, t) => check_pairs(x.n, p, t)?,
    }
    if let Some(s) = scale {
        if !(s.is_finite() && s > 0.0) {
            return Err(Error::Value(format!("scale must be a finite number > 0, got {s}")));
        }
    }
    let mut r = ratios(x, target);
    let p = r.len();
    if p == 0 {
        return Err(Error::Value("no pairs to compare: x needs at least 2 points (or pairs= at least one row)".into()));
    }
    let (lo, hi) = r
        .par_iter()
        .fold(|| (f64::INFINITY, 0.0f64), |(a, b), &v| (a.min(v), b.max(v)))
        .reduce(|| (f64::INFINITY, 0.0f64), |(a, b), (c, d)| (a.min(c), b.max(d)));
    let worst = if lo == 0.0 { f64::INFINITY } else { hi / lo };
    let s = match scale {
        Some(s) => s,
        None => fitted_scale(&mut r),
    };
    let mean = sum_dd(&r, |v| (v / s - 1.0).abs()) / p as f64;
    Ok(Distortion { mean, worst, scale: s, pairs: p })
}
