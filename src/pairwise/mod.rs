//! Points prepared once for many pairwise distances (distance matrices,
//! neighbour search, metric trees): validated, widened to float64, stored
//! contiguously with a per-point factor, so that a pair costs one pass over
//! the coordinates plus one transcendental.
//!
//! For every model the pair quantity is `h = sinh(d/(2R))^2` (monotone in
//! the distance, so rankings need no transcendental), formed from the input
//! coordinates' differences:
//! * Poincaré: `h = kappa |x - y|^2 a_x a_y`, `a = 1/g`;
//! * half-space: `h = |x - y|^2 a_x a_y / 4`, `a = 1/x_d`;
//! * Klein: `h = ((kappa (k - l).(k + l)/(s_k + s_l))^2 + kappa |k - l|^2) /
//!   (4 s_k s_l)`, `s = sqrt(g)`;
//! * hyperboloid: the law-of-cosines split of `hyperboloid::half_delta`.
//! The distance is `R acosh(1 + 2h)`, via [`acosh1p2_fast`].

pub mod matrix;
pub mod vptree;

use ndarray::Array2;

use crate::batch::Data;
use crate::error::{Error, Fault, Result};
use crate::models::ball::{checked_gap, Curvature};
use crate::models::Model;
use crate::models::{halfspace, hyperboloid};
use crate::numeric::{acosh1p2_fast, diff_of_squares, sumsq};

/// `|x - y|^2` summed in coordinate order: the order the tiled distance
/// kernels use, so that every path gives bit-identical distances.
#[inline(always)]
pub fn seq_dist_sq(x: &[f64], y: &[f64]) -> f64 {
    let mut acc = 0.0f64;
    for (a, b) in x.iter().zip(y) {
        let t = a - b;
        acc = t.mul_add(t, acc);
    }
    acc
}

/// `h` from a squared difference and the two per-point factors, in the one
/// evaluation order shared by all kernels. `ax * ay` first, so that `h` (and
/// the distance) is bitwise symmetric in the two points.
#[inline(always)]
pub fn scaled_h(d2: f64, ax: f64, ay: f64, s: f64) -> f64 {
    (d2 * (ax * ay)) * s
}

/// Points of one model ready for pairwise work.
#[derive(Clone, Debug)]
pub struct Prepared {
    pub model: Model,
    pub curvature: Curvature,
    /// Number of points.
    pub n: usize,
    /// Coordinates per point as stored (d + 1 for the hyperboloid: x0 is
    /// replaced by nothing; the spatial part is stored, so `w = d`).
    pub w: usize,
    /// Row-major `n x w` coordinates (hyperboloid: spatial parts only).
    pub coords: Vec<f64>,
    /// The per-point factor (see the module docs): `1/g` (Poincaré), `1/x_d`
    /// (half-space), `sqrt(g)` (Klein), `x0/R` (hyperboloid).
    pub aux: Vec<f64>,
}

impl Prepared {
    /// Validates and prepares `(n, d)` points (`(n, d + 1)` for the
    /// hyperboloid). `name` is the argument name used in messages.
    pub fn new(model: Model, curvature: Curvature, name: &str, x: &Data) -> Result<Prepared> {
        let shape = x.shape().to_vec();
        let describe =
            |name: &str, shape: &[usize], i: usize, f: Fault| crate::error::row_error(name, shape, &[i], f, x.is_f32());
        if shape.len() != 2 {
            return Err(Error::Value(format!(
                "{name} must be a 2-D array of points, shape (n, d); got shape {shape:?}"
            )));
        }
        let (n, width) = (shape[0], shape[1]);
        let min_w = if model == Model::Hyperboloid { 2 } else { 1 };
        if width < min_w {
            return Err(Error::Value(format!(
                "{name} has {width} coordinates per point; {model:?} points need at least {min_w}"
            )));
        }
        let w = if model == Model::Hyperboloid { width - 1 } else { width };
        let mut coords = vec![0f64; n * w];
        let mut aux = vec![0f64; n];
        let mut row = vec![0f64; width];
        let k = curvature;
        for i in 0..n {
            match x {
                Data::F64(a) | Data::Weak(a) => {
                    for (j, v) in row.iter_mut().enumerate() {
                        *v = a[[i, j]];
                    }
                }
                Data::F32(a) => {
                    for (j, v) in row.iter_mut().enumerate() {
                        *v = f64::from(a[[i, j]]);
                    }
                }
            }
            let r = &row[..];
            let (dst, a) = match model {
                Model::Poincare => {
                    let g = checked_gap(&k, r).map_err(|f| describe(name, &shape, i, f))?.value();
                    (r, 1.0 / g)
                }
                Model::Klein => {
                    let g = checked_gap(&k, r).map_err(|f| describe(name, &shape, i, f))?.value();
                    (r, g.sqrt())
                }
                Model::HalfSpace => {
                    halfspace::read_point(r).map_err(|f| describe(name, &shape, i, f))?;
                    (r, 1.0 / r[width - 1])
                }
                Model::Hyperboloid => {
                    let c = hyperboloid::read_point(&k, r).map_err(|f| describe(name, &shape, i, f))?;
                    (&r[1..], c)
                }
            };
            coords[i * w..(i + 1) * w].copy_from_slice(dst);
            aux[i] = a;
        }
        Ok(Prepared { model, curvature, n, w, coords, aux })
    }

    #[inline(always)]
    pub fn row(&self, i: usize) -> &[f64] {
        &self.coords[i * self.w..(i + 1) * self.w]
    }

    /// `h = sinh(d/(2R))^2` between point `i` of `self` and point `j` of `o`
    /// (same model and curvature).
    #[inline(always)]
    pub fn half_delta(&self, i: usize, o: &Prepared, j: usize) -> f64 {
        let (x, y) = (self.row(i), o.row(j));
        let (ax, ay) = (self.aux[i], o.aux[j]);
        let k = &self.curvature;
        match self.model {
            Model::Poincare => scaled_h(seq_dist_sq(x, y), ax, ay, k.kappa),
            Model::HalfSpace => scaled_h(seq_dist_sq(x, y), ax, ay, 0.25),
            Model::Klein => {
                // |k|^2 - |l|^2 formed error-free: near the sphere this term
                // dominates and a plain sum loses ~1e-11 relative.
                let ds = diff_of_squares(x, y, 1.0);
                let dg = k.kappa * ds / (ax + ay);
                (dg * dg + k.kappa * seq_dist_sq(x, y)) / (4.0 * ax * ay)
            }
            Model::Hyperboloid => hyperboloid::half_delta(k, x, ax, y, ay),
        }
    }

    /// The hyperbolic distance between point `i` and point `j` of `o`.
    #[inline(always)]
    pub fn distance(&self, i: usize, o: &Prepared, j: usize) -> f64 {
        self.curvature.radius * acosh1p2_fast(self.half_delta(i, o, j))
    }

    /// Checks that two prepared sets can be compared.
    pub fn check_compatible(&self, o: &Prepared, names: (&str, &str)) -> Result<()> {
        if self.w != o.w {
            let (a, b) = if self.model == Model::Hyperboloid { (self.w + 1, o.w + 1) } else { (self.w, o.w) };
            return Err(Error::Value(format!(
                "mismatched point dimension: {} has {a} coordinates per point but {} has {b}",
                names.0, names.1
            )));
        }
        Ok(())
    }

    /// The squared-norm-free "Euclidean" coordinates, for tests.
    pub fn coords_array(&self) -> Array2<f64> {
        Array2::from_shape_vec((self.n, self.w), self.coords.clone()).expect("shape")
    }

    /// Sum of squares of one row (used by tree heuristics).
    pub fn norm_sq(&self, i: usize) -> f64 {
        sumsq(self.row(i))
    }
}
