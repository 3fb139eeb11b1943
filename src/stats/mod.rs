//! Statistics of point sets: centroids (Fréchet mean, Einstein midpoint),
//! dispersion, and clustering.

pub mod centroids;
pub mod kmeans;
pub mod partial;

/// Points of the unit Poincaré ball for the tests, radii up to `rmax` (a
/// small LCG: common practice for reproducible test data).
#[cfg(test)]
pub(crate) fn test_ball(n: usize, d: usize, rmax: f64, seed: u64) -> Vec<f64> {
    let mut s = seed;
    let mut u = || {
        s = s.wrapping_mul(6364136223846793005).wrapping_add(1442695040888963407);
        (s >> 11) as f64 / (1u64 << 53) as f64
    };
    let mut out = Vec::with_capacity(n * d);
    for _ in 0..n {
        let v: Vec<f64> = (0..d).map(|_| u() - 0.5).collect();
        let nv = v.iter().map(|a| a * a).sum::<f64>().sqrt();
        let r = (0.5 * rmax * u()).tanh();
        out.extend(v.iter().map(|a| a / nv * r));
    }
    out
}
