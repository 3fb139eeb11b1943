//! The exact gaps the ball kernels return (the input of the rim rule), and
//! the rim rule itself.
//!
//! The gap of a result is defined as `1 - kappa |z|^2`; every point kernel
//! returns it from an identity of its operation (Ungar, *Analytic
//! Hyperbolic Geometry* (2005): `g_{x⊕y} = g_x g_y / D` for Möbius addition,
//! `g_x g_y / (1 + kappa x.y)^2` for Einstein addition; the others from the
//! hyperboloid images, see the doc comments). At radii up to 0.9 R the
//! rounded coordinates of a result determine its gap to ~1e-15 relative, so
//! the identity must agree with the definition there.

use gyrokit::models::ball::{settle, Curvature};
use gyrokit::models::gyro::GyroBall;
use gyrokit::models::klein::Einstein;
use gyrokit::models::poincare::{self, Mobius};
use gyrokit::numeric::gap;

/// A small deterministic generator (xorshift), so the test needs no seed file.
struct Rng(u64);

impl Rng {
    fn next(&mut self) -> f64 {
        self.0 ^= self.0 << 13;
        self.0 ^= self.0 >> 7;
        self.0 ^= self.0 << 17;
        (self.0 >> 11) as f64 / (1u64 << 53) as f64
    }
    /// A point at radius `r R` in a random direction.
    fn point(&mut self, c: &Curvature, d: usize, r: f64) -> Vec<f64> {
        let v: Vec<f64> = (0..d).map(|_| self.next() - 0.5).collect();
        let n = v.iter().map(|a| a * a).sum::<f64>().sqrt();
        v.iter().map(|a| a / n * r * c.radius).collect()
    }
}

fn check(name: &str, c: &Curvature, got: f64, z: &[f64]) {
    let want = gap(c.kappa, z);
    assert!(((got - want) / want).abs() < 1e-13, "{name}: identity {got} vs definition {want}");
}

fn all_kernels<M: GyroBall>(seed: u64) {
    let mut rng = Rng(seed);
    for &k in &[-1.0, -0.3, -4.0] {
        let c = Curvature::new(k).unwrap();
        for d in 1..=5 {
            for _ in 0..50 {
                let r = 0.9 * rng.next();
                let x = rng.point(&c, d, r);
                let r = 0.9 * rng.next();
                let y = rng.point(&c, d, r);
                let (gx, gy) = (gap(c.kappa, &x), gap(c.kappa, &y));
                let mut z = vec![0.0; d];
                let g = M::add_g(&c, &x, gx, &y, gy, 1.0, &mut z);
                check("add", &c, g, &z);
                let g = M::add_g(&c, &x, gx, &y, gy, -1.0, &mut z);
                check("sub", &c, g, &z);
                let r = 2.0 * rng.next() - 0.5;
                let g = M::scale_g(&c, r, &x, gx, &mut z);
                check("scale", &c, g, &z);
                let g = M::midpoint_g(&c, &x, gx, &y, gy, &mut z);
                check("midpoint", &c, g, &z);
                let t = 1.4 * rng.next() - 0.2;
                let g = M::geodesic_g(&c, &x, gx, &y, gy, t, &mut z);
                check("geodesic", &c, g, &z);
                // a tangent short enough to stay within 0.9 R or so
                let r = 0.3 * rng.next();
                let v: Vec<f64> = rng.point(&c, d, r).iter().map(|a| a * gx).collect();
                let g = M::exp_map_g(&c, &x, gx, &v, &mut z);
                check("exp_map", &c, g, &z);
            }
        }
    }
}

#[test]
fn poincare_kernels_return_the_gap_of_their_result() {
    all_kernels::<Mobius>(0x9e37_79b9_7f4a_7c15);
}

#[test]
fn klein_kernels_return_the_gap_of_their_result() {
    all_kernels::<Einstein>(0x2545_f491_4f6c_dd1d);
}

#[test]
fn coadd_and_matvec_return_the_gap_of_their_result() {
    let mut rng = Rng(77);
    let c = Curvature::new(-0.7).unwrap();
    for d in 1..=4 {
        for _ in 0..50 {
            // coadd is 2 ⊗ midpoint: keep the inputs within 0.6 R
            let r = 0.6 * rng.next();
            let x = rng.point(&c, d, r);
            let r = 0.6 * rng.next();
            let y = rng.point(&c, d, r);
            let (gx, gy) = (gap(c.kappa, &x), gap(c.kappa, &y));
            let mut z = vec![0.0; d];
            let g = poincare::coadd_g(&c, &x, gx, &y, gy, &mut z);
            check("coadd", &c, g, &z);
            let m: Vec<f64> = (0..d * d).map(|_| 1.5 * rng.next() - 0.75).collect();
            let g = poincare::matvec_g(&c, &m, &x, gx, &mut z);
            check("matvec", &c, g, &z);
        }
    }
}

#[test]
fn the_rim_rule_holds_the_last_radius_and_rejects_beyond() {
    let c = Curvature::default();
    let u = f64::EPSILON / 2.0;
    // a result computed as 1.0 whose exact gap is that of 1 - u (2u - u^2):
    // the last rounding put it on the sphere; it is held, at 1 - u
    let mut z = [1.0, 0.0];
    assert!(settle(&c, &mut z, 2.0 * u, false));
    assert_eq!(z, [1.0 - u, 0.0]);
    // exact gap below u: beyond what float64 holds, whatever the rounding
    // gave (here a point inside, 1 - u, at the wrong distance)
    let mut z = [1.0 - u, 0.0];
    assert!(!settle(&c, &mut z, 0.4 * u, false));
    // far from the sphere nothing moves
    let mut z = [0.6, -0.3];
    assert!(settle(&c, &mut z, gap(1.0, &[0.6, -0.3]), false));
    assert_eq!(z, [0.6, -0.3]);
    // float32 results: the limit is float32's unit roundoff, and the held
    // point is inside after rounding to float32
    let u32 = f32::EPSILON as f64 / 2.0;
    let mut z = [0.6 * (1.0 - 0.1 * u32), 0.8 * (1.0 - 0.1 * u32)];
    assert!(!settle(&c, &mut z, 0.2 * u32, true));
    assert!(settle(&c, &mut z, 3.0 * u32, true));
    let z32: Vec<f64> = z.iter().map(|&v| v as f32 as f64).collect();
    assert_eq!(z32, z.to_vec());
    assert!(gap(1.0, &z32) > 0.0);
}
