//! Sampling: the wrapped normal distribution and the uniform distribution
//! on a hyperbolic ball, in every model.
//!
//! **Wrapped normal** (Nagano, Yamaguchi, Fujita and Koyama, "A wrapped
//! normal distribution on hyperbolic space for gradient-based learning",
//! ICML 2019): `z ~ N(0, cov)` in the tangent space at the origin, in
//! orthonormal (intrinsic, Riemannian) coordinates, carried to `mean` by
//! parallel transport along the geodesic from the origin, then mapped by
//! `exp_mean`. In the Poincaré ball this is `mean ⊕ p0(z)` with
//! `p0(z) = R tanh(|z|/(2R)) z/|z|` = `exp_0` of `z` (the left
//! gyrotranslation `mean ⊕ ·` is the transvection along the geodesic through
//! the origin and `mean`: its differential at the origin is that parallel
//! transport). Its density with respect to the Riemannian volume follows
//! from the isometry and the volume element of `exp_0` in geodesic polar
//! coordinates, `(R sinh(r/R))^(d-1) dr dΩ` against `r^(d-1) dr dΩ`:
//!
//! `log p(x) = log N(z; 0, cov) - (d - 1) log(sinh(r/R)/(r/R))`,
//! `z = exp_0^{-1}(⊖mean ⊕ x)`, `r = |z| = d(mean, x)`.
//!
//! The intrinsic frame is the coordinate axes at the model's origin: the
//! Poincaré and Klein centres, the hyperboloid's `(R, 0, ..., 0)`, and the
//! half-space's `(0, ..., 0, R)`, whose last axis the conversion through the
//! Poincaré hub reverses (it is flipped back here).
//!
//! **Uniform on a ball** of radius `rho R` about the origin: a uniform
//! direction (normalised normals) and a radius `t R` with density
//! `∝ sinh(t)^m` on `[0, rho]`, `m = dim - 1`, drawn exactly by rejection
//! from one of two proposals, each inverted in closed form:
//!
//! * `g1 ∝ sinh(t)^(m-1) cosh(t)`: `sinh(t) = sinh(rho) U^(1/m)` (in
//!   logarithms, so no overflow for any radius), accepted with probability
//!   `sinh/cosh = tanh(t)`;
//! * `g2 ∝ t^m` (the Euclidean ball): `t = rho U^(1/(m+1))`, accepted with
//!   probability `(sinh(t)/t)^m / (sinh(rho)/rho)^m`.
//!
//! Their overall acceptance rates are `m I/sinh(rho)^m` and
//! `(m+1) I/(rho sinh(rho)^m)` (`I` the target's integral): `g2` is the
//! better one exactly when `rho < (m+1)/m`, and the better one accepts at
//! least ~0.76 of its draws for every `m` and `rho` (the worst case is near
//! `rho ≈ 1`, where both give about `tanh(1)`). No CDF is inverted
//! numerically, so the law holds for any radius and dimension.
//!
//! Reproducibility: the points are drawn in chunks of [`CHUNK`] points, each
//! from its own xoshiro256** stream (the seed's generator jumped by 2^128
//! per chunk, `numeric::rng::streams`); results depend on the seed only.

use ndarray::Array2;
use rayon::prelude::*;

use crate::batch::{map_rows_with, scalar_core, Data, Operand, Output};
use crate::error::{row_error, value_err, Error, Fault, Result, RowFault};
use crate::models::ball::{settle, Curvature};
use crate::models::convert::{from_hub, to_hub};
use crate::models::{halfspace, hyperboloid, poincare, Model};
use crate::numeric::rng::{streams, Rng};
use crate::numeric::{artanh_from_gap, sech2, sumsq, with_scratch};

/// Points per random stream (fixed: results never depend on threads).
pub const CHUNK: usize = 1024;

/// `ln(sinh(x)/x)` for `x >= 0`, to a few ulps: for `x <= 1` as
/// `log1p(sum_{k>=1} x^(2k)/(2k+1)!)` (no cancellation), beyond as
/// `x + log1p(-e^(-2x)) - ln 2 - ln x` (no overflow).
#[inline(always)]
pub fn log_sinhc(x: f64) -> f64 {
    if x <= 1.0 {
        let x2 = x * x;
        // Horner form of x^2/3! + x^4/5! + ... + x^18/19! (the next term is
        // below 2^-60 relative for x <= 1)
        let mut s = 0.0;
        let mut k = 9.0f64;
        while k >= 1.0 {
            s = x2 / ((2.0 * k) * (2.0 * k + 1.0)) * (1.0 + s);
            k -= 1.0;
        }
        s.ln_1p()
    } else {
        x + (-(-2.0 * x).exp()).ln_1p() - std::f64::consts::LN_2 - x.ln()
    }
}

/// The lower Cholesky factor `L` (row-major, `d x d`) of a symmetric
/// positive definite `cov`. `cov` must be symmetric to 1e-12 relative.
pub fn cholesky(cov: &[f64], d: usize) -> Result<Vec<f64>> {
    if cov.len() != d * d {
        return value_err(format!("cov must have shape ({d}, {d}), got {} entries", cov.len()));
    }
    if let Some(i) = cov.iter().position(|v| !v.is_finite()) {
        return value_err(format!("cov contains NaN or infinity (entry ({}, {}))", i / d, i % d));
    }
    let scale = (0..d).map(|i| cov[i * d + i].abs()).fold(0.0, f64::max);
    for i in 0..d {
        for j in 0..i {
            if (cov[i * d + j] - cov[j * d + i]).abs() > 1e-12 * scale {
                return value_err(format!(
                    "cov is not symmetric: cov[{i}, {j}] = {} but cov[{j}, {i}] = {}",
                    cov[i * d + j],
                    cov[j * d + i]
                ));
            }
        }
    }
    let mut l = vec![0.0; d * d];
    for j in 0..d {
        let mut s = cov[j * d + j];
        for p in 0..j {
            s -= l[j * d + p] * l[j * d + p];
        }
        if s.is_nan() || s <= 1e-14 * scale || scale == 0.0 {
            return value_err(format!(
                "cov is not positive definite (its Cholesky factorisation fails at row {j}): the wrapped \
                 normal needs a covariance of full rank"
            ));
        }
        let ljj = s.sqrt();
        l[j * d + j] = ljj;
        for i in (j + 1)..d {
            let mut s = cov[i * d + j];
            for p in 0..j {
                s -= l[i * d + p] * l[j * d + p];
            }
            l[i * d + j] = s / ljj;
        }
    }
    Ok(l)
}

/// The tangent dimension `d` of points of width `w` in `model`.
fn tangent_dim(model: Model, w: usize) -> usize {
    if model == Model::Hyperboloid {
        w.saturating_sub(1)
    } else {
        w
    }
}

/// Reads the mean (one point of `model`) into the hub: `(p, gap)`.
fn read_mean(model: Model, k: &Curvature, mean: &[f64]) -> Result<(Vec<f64>, f64)> {
    let w = mean.len();
    let d = tangent_dim(model, w);
    if d == 0 {
        return value_err(format!("mean must be one point of {model:?} coordinates, got {w} coordinates"));
    }
    let mut p = vec![0.0; d];
    let g = to_hub(model, k, mean, &mut p).map_err(|f| row_error("mean", &[w], &[], f, false))?;
    Ok((p, g))
}

/// Writes the hub point `(p, g)` as a sample of `model` into `out`, applying
/// the rim rule of the ball models and the hyperboloid's range.
#[inline(always)]
fn emit(model: Model, k: &Curvature, p: &[f64], g: f64, out: &mut [f64]) -> std::result::Result<(), Fault> {
    let g_out = from_hub(model, k, p, g, out);
    match model {
        Model::Poincare | Model::Klein => {
            let name = if model == Model::Klein { "Klein" } else { "Poincaré" };
            if !settle(k, out, g_out, false) {
                return Err(Fault::Unrepresentable(name, false));
            }
        }
        _ => {
            if !out.iter().all(|v| v.is_finite()) {
                return Err(Fault::Overflow);
            }
            if model == Model::Hyperboloid && sumsq(&out[1..]) > hyperboloid::MAX_SPATIAL_SQ {
                return Err(Fault::ResultBeyondRange);
            }
            if model == Model::HalfSpace {
                // the range every half-space function reads
                halfspace::read_point(out)?;
            }
        }
    }
    Ok(())
}

/// `exp_0` of the intrinsic tangent vector `z` (length `r = |z|`) in the
/// Poincaré ball: writes `p0` and returns its exact gap `sech^2(r/(2R))`.
#[inline(always)]
fn exp_origin(k: &Curvature, z: &[f64], r: f64, p0: &mut [f64]) -> f64 {
    let half = 0.5 * r * k.sqrt_kappa;
    let f = if r > 0.0 { k.radius * half.tanh() / r } else { 0.0 };
    for (o, &v) in p0.iter_mut().zip(z) {
        *o = f * v;
    }
    sech2(half)
}

/// Runs `fill(rng, rows)` over chunks of [`CHUNK`] rows of an `(n, w)`
/// output, each chunk with its own stream; the first fault (lowest row)
/// becomes the error, phrased by `describe`.
fn sample_rows<F>(
    n: usize,
    w: usize,
    seed: u64,
    fill: F,
    describe: &dyn Fn(usize, Fault) -> Error,
) -> Result<Array2<f64>>
where
    F: Fn(&mut Rng, &mut [f64]) -> std::result::Result<(), (usize, Fault)> + Sync,
{
    let total = n.checked_mul(w).filter(|&t| t <= isize::MAX as usize / 8);
    let mut out: Vec<f64> = Vec::new();
    if total.map_or(true, |t| out.try_reserve_exact(t).is_err()) {
        return value_err(format!("size is too large: {n} samples of {w} coordinates do not fit in memory"));
    }
    out.resize(n * w, 0.0);
    let nchunks = n.div_ceil(CHUNK);
    let rngs = streams(seed, nchunks);
    let faults: Vec<Option<(usize, Fault)>> = if w == 0 || n == 0 {
        Vec::new()
    } else {
        out.par_chunks_mut(CHUNK * w)
            .zip(rngs.into_par_iter())
            .enumerate()
            .map(|(c, (block, mut rng))| fill(&mut rng, block).err().map(|(i, f)| (c * CHUNK + i, f)))
            .collect()
    };
    if let Some((i, f)) = faults.into_iter().flatten().next() {
        return Err(describe(i, f));
    }
    Ok(Array2::from_shape_vec((n, w), out).expect("shape matches length"))
}

fn sample_fault(i: usize, f: Fault) -> Error {
    Error::Value(format!(
        "sample {i} {}; draw it in model='hyperboloid', or narrow the distribution",
        f.describe_as("x").replacen("cannot be converted: ", "cannot be returned: ", 1)
    ))
}

/// `n` points of the wrapped normal with mean `mean` (one point of `model`)
/// and covariance `cov` (`d x d`, row-major, intrinsic coordinates).
pub fn wrapped_normal(
    model: Model,
    k: Curvature,
    mean: &[f64],
    cov: &[f64],
    n: usize,
    seed: u64,
) -> Result<Array2<f64>> {
    let (mu, gmu) = read_mean(model, &k, mean)?;
    let d = mu.len();
    let l = cholesky(cov, d)?;
    let w = model.width(d);
    let flip = model == Model::HalfSpace;
    sample_rows(
        n,
        w,
        seed,
        |rng, block| {
            with_scratch(3 * d, |buf| {
                let (e, rest) = buf.split_at_mut(d);
                let (z, p0) = rest.split_at_mut(d);
                let mut hub = vec![0.0; d];
                for (i, row) in block.chunks_exact_mut(w).enumerate() {
                    rng.fill_normal(e);
                    for a in 0..d {
                        let lr = &l[a * d..a * d + a + 1];
                        z[a] = lr.iter().zip(&e[..=a]).map(|(x, y)| x * y).sum();
                    }
                    if flip {
                        z[d - 1] = -z[d - 1];
                    }
                    let r = sumsq(z).sqrt();
                    let g0 = exp_origin(&k, z, r, p0);
                    let g = poincare::add_g(&k, &mu, gmu, p0, g0, 1.0, &mut hub);
                    emit(model, &k, &hub, g, row).map_err(|f| (i, f))?;
                }
                Ok(())
            })
        },
        &sample_fault,
    )
}

/// The log-density (Riemannian volume) of the wrapped normal at `x`:
/// `(..., w) -> (...)`.
pub fn wrapped_normal_logpdf<'a>(
    model: Model,
    k: Curvature,
    x: Data<'a>,
    mean: &[f64],
    cov: &[f64],
    force_f64: bool,
) -> Result<Output> {
    let (mu, gmu) = read_mean(model, &k, mean)?;
    let d = mu.len();
    let l = cholesky(cov, d)?;
    let ops = [Operand::point("x", x)];
    if let Some(&w) = ops[0].data.shape().last() {
        if w != model.width(d) {
            return value_err(format!(
                "mismatched point dimension: mean has {} coordinates but x has {w}",
                model.width(d)
            ));
        }
    }
    // -log det(cov)/2 - d log(2 pi)/2
    let log_norm = -(0..d).map(|i| l[i * d + i].ln()).sum::<f64>() - 0.5 * d as f64 * (2.0 * std::f64::consts::PI).ln();
    let flip = model == Model::HalfSpace;
    map_rows_with(&ops, &scalar_core, 4 * d + 40, force_f64, |r, out| {
        with_scratch(2 * d, |buf| {
            let (p, u) = buf.split_at_mut(d);
            let g = to_hub(model, &k, r[0], p).map_err(|f| RowFault::new(0, f))?;
            // mean ⊖ x = ⊖(⊖mean ⊕ x): the sign is restored below
            let gu = poincare::add_g(&k, &mu, gmu, p, g, -1.0, u);
            let t = k.sqrt_kappa * sumsq(u).sqrt();
            let rho = 2.0 * artanh_from_gap(t, gu); // d(mean, x)/R
            let f = if t > 0.0 { -rho * k.radius * k.sqrt_kappa / t } else { 0.0 };
            u.iter_mut().for_each(|v| *v *= f);
            if flip {
                u[d - 1] = -u[d - 1];
            }
            // |L^-1 z|^2 by forward substitution
            let mut q = 0.0;
            for a in 0..d {
                let mut s = u[a];
                for b in 0..a {
                    s -= l[a * d + b] * u[b];
                }
                u[a] = s / l[a * d + a];
                q += u[a] * u[a];
            }
            out[0] = log_norm - 0.5 * q - (d as f64 - 1.0) * log_sinhc(rho);
            Ok(())
        })
    })
}

/// A radius `t` (units of R) with density `∝ sinh(t)^m` on `[0, rho]`
/// (see the module notes).
#[inline(always)]
pub fn radial(rng: &mut Rng, m: f64, rho: f64) -> f64 {
    if m == 0.0 || rho * m < m + 1.0 {
        let top = log_sinhc(rho);
        loop {
            let t = rho * (rng.uniform_pos().ln() / (m + 1.0)).exp();
            if m == 0.0 || rng.uniform_pos().ln() <= m * (log_sinhc(t) - top) {
                return t;
            }
        }
    } else {
        // ln sinh(rho), rho >= 1 here
        let ls = rho + (-(-2.0 * rho).exp()).ln_1p() - std::f64::consts::LN_2;
        loop {
            let lsinh = ls + rng.uniform_pos().ln() / m;
            let t = if lsinh < 0.0 {
                lsinh.exp().asinh()
            } else {
                // asinh(e^L) = L + ln(1 + sqrt(1 + e^-2L)), no overflow
                lsinh + (1.0 + (1.0 + (-2.0 * lsinh).exp()).sqrt()).ln()
            };
            let t = t.min(rho);
            if rng.uniform() < t.tanh() {
                return t;
            }
        }
    }
}

/// `n` points uniform in the ball of radius `radius` (a distance) about the
/// origin of `model`, in dimension `dim`.
pub fn uniform_ball(model: Model, k: Curvature, radius: f64, n: usize, dim: usize, seed: u64) -> Result<Array2<f64>> {
    if !radius.is_finite() || radius < 0.0 {
        return value_err(format!("radius must be a finite distance >= 0, got {radius}"));
    }
    if dim == 0 {
        return value_err("dim must be at least 1");
    }
    if model == Model::HalfSpace && dim < 1 {
        return value_err("dim must be at least 1");
    }
    let rho = radius * k.sqrt_kappa;
    let m = (dim - 1) as f64;
    let w = model.width(dim);
    sample_rows(
        n,
        w,
        seed,
        |rng, block| {
            with_scratch(2 * dim, |buf| {
                let (dir, p) = buf.split_at_mut(dim);
                for (i, row) in block.chunks_exact_mut(w).enumerate() {
                    let t = radial(rng, m, rho);
                    let nn = loop {
                        rng.fill_normal(dir);
                        let s = sumsq(dir);
                        if s > 0.0 {
                            break s.sqrt();
                        }
                    };
                    dir.iter_mut().for_each(|v| *v *= t * k.radius / nn);
                    let g = exp_origin(&k, dir, t * k.radius, p);
                    emit(model, &k, p, g, row).map_err(|f| (i, f))?;
                }
                Ok(())
            })
        },
        &sample_fault,
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn log_sinhc_matches_direct_forms() {
        // mpmath at 50 digits, ln(sinh(x)/x) at the decimal x (the float64
        // rounding of x moves the value by < 2e-16 relative)
        let refs = [
            (0.001, 1.6666666111111146384e-7),
            (0.1, 0.0016661114635804605114),
            (0.5, 0.041324854612918108978),
            (0.999, 0.16112646427129123825),
            (1.0, 0.16143936157119563361),
            (1.001, 0.16175253480943557613),
        ];
        for (x, r) in refs {
            assert!((log_sinhc(x) - r).abs() <= 1e-15 * r, "{x}: {} vs {r}", log_sinhc(x));
        }
        // the direct form where it keeps its digits (sinh(x)/x far from 1)
        for &x in &[2.0, 10.0, 50.0] {
            let direct = (f64::sinh(x) / x).ln();
            assert!((log_sinhc(x) - direct).abs() <= 4e-16 * direct, "{x}");
        }
        // series: ln(sinh x / x) = x^2/6 - x^4/180 + ... (handbook series)
        let x = 1e-5;
        assert!((log_sinhc(x) - (x * x / 6.0 - x.powi(4) / 180.0)).abs() < 1e-30);
        assert_eq!(log_sinhc(0.0), 0.0);
        assert!((log_sinhc(800.0) - (800.0 - std::f64::consts::LN_2 - 800f64.ln())).abs() < 1e-12);
    }

    #[test]
    fn cholesky_reconstructs_and_rejects() {
        let c = [4.0, 2.0, 0.4, 2.0, 5.0, 1.0, 0.4, 1.0, 3.0];
        let l = cholesky(&c, 3).unwrap();
        for i in 0..3 {
            for j in 0..3 {
                let s: f64 = (0..3).map(|p| l[i * 3 + p] * l[j * 3 + p]).sum();
                assert!((s - c[i * 3 + j]).abs() < 1e-14);
            }
        }
        assert!(cholesky(&[1.0, 2.0, 2.0, 1.0], 2).is_err());
        assert!(cholesky(&[1.0, 0.5, 0.4, 1.0], 2).is_err());
        assert!(cholesky(&[1.0, 0.0, 0.0, f64::NAN], 2).is_err());
    }

    #[test]
    fn radial_stays_in_range_and_is_deterministic() {
        for &(m, rho) in &[(0.0, 3.0), (1.0, 1e-3), (1.0, 5.0), (15.0, 0.5), (15.0, 40.0), (999.0, 2.0)] {
            let mut a = Rng::new(9);
            let mut b = Rng::new(9);
            for _ in 0..1000 {
                let t = radial(&mut a, m, rho);
                assert!((0.0..=rho).contains(&t));
                assert_eq!(t.to_bits(), radial(&mut b, m, rho).to_bits());
            }
        }
    }
}
