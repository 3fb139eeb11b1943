//! Points prepared once for many pairwise distances (distance matrices,
//! neighbour search, metric trees, element-wise distances): validated,
//! widened to float64 and stored contiguously, so that a pair costs one pass
//! over the coordinates plus one transcendental, the same for every model.
//!
//! The pair quantity is `h = sinh(d/(2R))^2` (monotone in the distance, so
//! rankings need no transcendental); the distance is `R acosh(1 + 2h)`, via
//! [`acosh1p2_fast`]. Every model is stored in a *pair space* where
//! `h = |x - y|^2 a_x a_y s`:
//! * Poincaré: its own coordinates, `a = 1/g`, `s = kappa`;
//! * half-space: its own coordinates, `a = 1/y_d`, `s = 1/4`;
//! * Klein and hyperboloid: the Poincaré image (the hub) of each point,
//!   computed in double-double from the input and rounded, with the exact
//!   factor `a = 1/g` of the image (`(1 + sqrt g_k)/(2 sqrt g_k)` for Klein,
//!   `(1 + x0/R)/2` for the hyperboloid).
//!
//! So all four models run the one tiled kernel of `matrix.rs` at the same
//! per-pair cost. The rounding of a hub point moves it by at most ~1 ulp of
//! R, which costs `|p - q|` a relative error of about `2^-51 R / |p - q|`.
//! Where that could matter (`kappa |p - q|^2 < 2^-12`, i.e. the images are
//! closer than R/64), the pair is *refined*: the difference is formed from
//! the double-double images, `(p_hi - q_hi) + (p_lo - q_lo)`, exact to
//! ~1e-31 R. On the hyperboloid, images far out (beyond ~37 R) can be so
//! close to the sphere that even the double-double difference has too few
//! digits (`kappa |p - q|^2 < 2^-100`); those pairs use the model's own
//! law-of-cosines form (`hyperboloid::half_delta`). Every path (matrix,
//! condensed, knn, radius, tree, element-wise distance) evaluates a pair
//! through [`pair_h`] in the same operation order, so all report
//! bit-identical distances for the same pair.

pub mod matrix;
pub mod vptree;

use crate::batch::{map_rows, scalar_core, Data, Operand, Output};
use crate::error::{Error, Fault, Result};
use crate::models::ball::{checked_gap, Curvature};
use crate::models::points::PointArray;
use crate::models::{halfspace, hyperboloid, klein, Model};
use crate::numeric::{acosh1p2_fast, with_scratch_of};

/// Below this `kappa |p - q|^2` a pair of hub images is refined from the
/// double-double images (see the module notes): the rounded images are
/// then within a factor 64 of their distance, and the plain form would keep
/// only ~13 digits.
pub const REFINE_BELOW: f64 = 1.0 / 4096.0; // 2^-12

/// Below this `kappa |p - q|^2` (double-double difference) a hyperboloid pair
/// uses the model's own form. The double-double images carry an absolute
/// error of about `3 2^-104 R`, so above it the difference keeps at least
/// 15 digits; below it (points far out on nearly the same ray, where the
/// images crowd at the sphere, or nearly coincident points) it may not.
const NATIVE_BELOW: f64 = 7.888609052210118e-31; // 2^-100

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

/// How a model's points are stored for pairwise work.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum PairSpace {
    /// The model's own coordinates are the pair space (Poincaré, half-space).
    Own,
    /// Rounded hub images, refined from their low parts (Klein).
    Hub,
    /// Rounded hub images, refined from their low parts, and the spatial
    /// part and `x0/R` for the far pairs (hyperboloid).
    HubFar,
}

impl PairSpace {
    pub fn of(model: Model) -> PairSpace {
        match model {
            Model::Poincare | Model::HalfSpace => PairSpace::Own,
            Model::Klein => PairSpace::Hub,
            Model::Hyperboloid => PairSpace::HubFar,
        }
    }
    /// Extra values stored per point for refinement, for dimension `w`.
    pub fn extra_width(self, w: usize) -> usize {
        match self {
            PairSpace::Own => 0,
            PairSpace::Hub => w,
            PairSpace::HubFar => 2 * w + 1,
        }
    }
}

/// The model constant `s` of `h = |x - y|^2 a_x a_y s`.
#[inline(always)]
pub fn pair_scale(model: Model, k: &Curvature) -> f64 {
    if model == Model::HalfSpace {
        0.25
    } else {
        k.kappa
    }
}

/// Reads one point of `model` into its pair space: writes the pair-space
/// coordinates to `hi` (length `w`) and the refinement data to `extra`
/// (length `PairSpace::of(model).extra_width(w)`), and returns the factor `a`.
/// `x` is the point as given (`w + 1` coordinates on the hyperboloid).
///
/// Hub images: `p = k/(1 + sqrt g_k)` (Klein), `p = x_s/(1 + c)` with
/// `c = sqrt(1 + kappa |x_s|^2) = x0/R` (hyperboloid), each quotient in
/// double-double from the exact inputs: the maps of
/// `models::convert::to_hub` carried to twice the precision, written beside
/// them (`klein::to_poincare_dd`, `hyperboloid::to_poincare_dd`).
#[inline(always)]
pub fn read_pair_point(
    model: Model,
    k: &Curvature,
    x: &[f64],
    hi: &mut [f64],
    extra: &mut [f64],
) -> std::result::Result<f64, Fault> {
    match model {
        Model::Poincare => {
            let g = checked_gap(k, x)?.value();
            hi.copy_from_slice(x);
            Ok(1.0 / g)
        }
        Model::HalfSpace => {
            halfspace::read_point(x)?;
            hi.copy_from_slice(x);
            Ok(1.0 / x[x.len() - 1])
        }
        Model::Klein => Ok(klein::to_poincare_dd(x, checked_gap(k, x)?, hi, extra)),
        Model::Hyperboloid => {
            let cx = hyperboloid::read_point(k, x)?;
            let xs = &x[1..];
            let (lo, far) = extra.split_at_mut(xs.len());
            far[..xs.len()].copy_from_slice(xs);
            far[xs.len()] = cx;
            Ok(hyperboloid::to_poincare_dd(k, xs, hi, lo))
        }
    }
}

/// `h = sinh(d/2R)^2` of one pair from the pair-space data of both points
/// and the plain `d2 = seq_dist_sq(x_hi, y_hi)`: the one evaluation shared by
/// the tiled kernels and the element-wise distance. `REFINE` is false for
/// the models stored in their own coordinates.
#[inline(always)]
pub fn pair_h(
    space: PairSpace,
    k: &Curvature,
    s: f64,
    d2: f64,
    x: (&[f64], &[f64], f64),
    y: (&[f64], &[f64], f64),
) -> f64 {
    if space == PairSpace::Own || k.kappa * d2 >= REFINE_BELOW {
        return scaled_h(d2, x.2, y.2, s);
    }
    refine_h(space, k, s, x, y)
}

/// The refined `h` of a close pair of hub images (see the module notes).
#[inline(never)]
#[cold]
fn refine_h(space: PairSpace, k: &Curvature, s: f64, x: (&[f64], &[f64], f64), y: (&[f64], &[f64], f64)) -> f64 {
    let w = x.0.len();
    let (xl, yl) = (&x.1[..w], &y.1[..w]);
    let mut acc = 0.0f64;
    for i in 0..w {
        // The high parts of close images differ exactly (Sterbenz); the low
        // parts carry what their rounding dropped.
        let t = (x.0[i] - y.0[i]) + (xl[i] - yl[i]);
        acc = t.mul_add(t, acc);
    }
    if space == PairSpace::HubFar && k.kappa * acc < NATIVE_BELOW {
        let (xs, cx) = (&x.1[w..2 * w], x.1[2 * w]);
        let (ys, cy) = (&y.1[w..2 * w], y.1[2 * w]);
        if xs == ys {
            // The same point (duplicates, the diagonal of a matrix): the
            // law-of-cosines form would spend O(d^2) exact minors on 0.
            return 0.0;
        }
        return hyperboloid::half_delta(k, xs, cx, ys, cy);
    }
    scaled_h(acc, x.2, y.2, s)
}

/// The hyperbolic distance from `h`.
#[inline(always)]
pub fn distance_from_h(k: &Curvature, h: f64) -> f64 {
    k.radius * acosh1p2_fast(h)
}

/// The distance between two points given in `model` coordinates, exactly as
/// the pairwise kernels compute it (bit for bit): the element-wise distance
/// of every model. Faults carry operand 0 or 1.
#[inline(always)]
pub fn point_distance(
    model: Model,
    k: &Curvature,
    x: &[f64],
    y: &[f64],
) -> std::result::Result<f64, crate::error::RowFault> {
    use crate::error::RowFault;
    let w = x.len() - usize::from(model == Model::Hyperboloid);
    let space = PairSpace::of(model);
    let ew = space.extra_width(w);
    with_scratch_of::<136, _>(2 * (w + ew), |buf| {
        let (bx, by) = buf.split_at_mut(w + ew);
        let (xh, xe) = bx.split_at_mut(w);
        let (yh, ye) = by.split_at_mut(w);
        let ax = read_pair_point(model, k, x, xh, xe).map_err(|f| RowFault::new(0, f))?;
        let ay = read_pair_point(model, k, y, yh, ye).map_err(|f| RowFault::new(1, f))?;
        let s = pair_scale(model, k);
        let h = pair_h(space, k, s, seq_dist_sq(xh, yh), (xh, xe, ax), (yh, ye, ay));
        Ok(distance_from_h(k, h))
    })
}

/// The element-wise distance of every model, `(..., w), (..., w) -> (...)`
/// (`w = d + 1` on the hyperboloid): [`point_distance`] per broadcast row,
/// so it agrees bit for bit with the matrix and neighbour paths.
pub fn distance_arrays<'a>(model: Model, k: Curvature, x: Data<'a>, y: Data<'a>) -> Result<Output> {
    let ops = [Operand::point("x", x), Operand::point("y", y)];
    if model == Model::Hyperboloid {
        hyperboloid::check_dim(&ops)?;
    }
    map_rows(
        &ops,
        &scalar_core,
        16,
        #[inline(always)]
        |r, out| {
            out[0] = point_distance(model, &k, r[0], r[1])?;
            Ok(())
        },
    )
}

/// Points of one model ready for pairwise work.
#[derive(Clone, Debug)]
pub struct Prepared {
    pub model: Model,
    pub curvature: Curvature,
    /// Number of points.
    pub n: usize,
    /// Pair-space coordinates per point: the ball dimension d for every
    /// model (the hyperboloid's x0 is not stored).
    pub w: usize,
    /// Row-major `n x w` pair-space coordinates (see the module notes).
    pub coords: Vec<f64>,
    /// The per-point factor `a` of `h = |x - y|^2 a_x a_y s`.
    pub aux: Vec<f64>,
    /// Row-major `n x extra_width(w)` refinement data (empty for the models
    /// stored in their own coordinates).
    pub extra: Vec<f64>,
}

/// Rows per parallel task when preparing points.
const PREP_CHUNK: usize = 4096;

impl Prepared {
    /// Validates and prepares `(n, d)` points (`(n, d + 1)` for the
    /// hyperboloid). `name` is the argument name used in messages.
    pub fn new(model: Model, curvature: Curvature, name: &str, x: &Data) -> Result<Prepared> {
        let pa = PointArray::new(model, name, x)?;
        let (n, w) = (pa.n, pa.d);
        let ew = PairSpace::of(model).extra_width(w);
        let mut coords = vec![0f64; n * w];
        let mut aux = vec![0f64; n];
        let mut extra = vec![0f64; n * ew];
        // Chunks zipped by hand: `extra` is empty for the models stored in
        // their own coordinates, and a zip would stop at the shortest.
        let mut ec = extra.chunks_mut((PREP_CHUNK * ew).max(1));
        let parts: Vec<(&mut [f64], &mut [f64], &mut [f64])> = coords
            .chunks_mut(PREP_CHUNK * w)
            .zip(aux.chunks_mut(PREP_CHUNK))
            .map(|(c, a)| (c, a, if ew == 0 { &mut [][..] } else { ec.next().expect("one extra chunk per chunk") }))
            .collect();
        pa.read_rows(PREP_CHUNK, parts, |(c, a, e), r, row| {
            a[r] = read_pair_point(model, &curvature, row, &mut c[r * w..(r + 1) * w], &mut e[r * ew..(r + 1) * ew])?;
            Ok(())
        })?;
        Ok(Prepared { model, curvature, n, w, coords, aux, extra })
    }

    /// Rebuilds a prepared set from its parts (a saved index), checking the
    /// lengths and the domain, so that a corrupted state is an error rather
    /// than NaN distances: points in their own coordinates are read again
    /// and must reproduce their factor bit for bit; hub images must lie in
    /// the closed ball with factors in `[1, 2^251]` (the largest a point of
    /// the hyperboloid range gives), and spatial parts in the hyperboloid
    /// range.
    pub fn from_parts(
        model: Model,
        curvature: Curvature,
        w: usize,
        coords: Vec<f64>,
        aux: Vec<f64>,
        extra: Vec<f64>,
    ) -> Result<Prepared> {
        let n = aux.len();
        let space = PairSpace::of(model);
        let ew = space.extra_width(w);
        let bad = |what: &str| Err(Error::Value(format!("invalid prepared point data: {what}")));
        if w == 0 || coords.len() != n * w || extra.len() != n * ew {
            return bad("lengths do not match the number of points");
        }
        if !coords.iter().chain(&aux).chain(&extra).all(|v| v.is_finite()) {
            return bad("values must be finite");
        }
        let p = Prepared { model, curvature, n, w, coords, aux, extra };
        let k = &p.curvature;
        for i in 0..n {
            let (row, a) = (p.row(i), p.aux[i]);
            let ok = match space {
                PairSpace::Own => {
                    let mut scratch = vec![0f64; w];
                    matches!(read_pair_point(model, k, row, &mut scratch, &mut []), Ok(b) if b == a)
                }
                PairSpace::Hub | PairSpace::HubFar => {
                    let far_ok = space == PairSpace::Hub || {
                        let e = p.extra_row(i);
                        crate::numeric::sumsq(&e[w..2 * w]) <= hyperboloid::MAX_SPATIAL_SQ && e[2 * w] >= 1.0
                    };
                    far_ok && k.kappa * crate::numeric::sumsq(row) <= 1.0 && (1.0..=2f64.powi(251)).contains(&a)
                }
            };
            if !ok {
                return bad(&format!("point {i} is outside the model's domain"));
            }
        }
        Ok(p)
    }

    /// The rows `order` of `self`, in that order.
    pub fn select(&self, order: &[usize]) -> Prepared {
        let (w, ew) = (self.w, self.extra_width());
        let mut coords = Vec::with_capacity(order.len() * w);
        let mut aux = Vec::with_capacity(order.len());
        let mut extra = Vec::with_capacity(order.len() * ew);
        for &i in order {
            coords.extend_from_slice(self.row(i));
            aux.push(self.aux[i]);
            extra.extend_from_slice(self.extra_row(i));
        }
        Prepared { model: self.model, curvature: self.curvature, n: order.len(), w, coords, aux, extra }
    }

    #[inline(always)]
    pub fn space(&self) -> PairSpace {
        PairSpace::of(self.model)
    }

    #[inline(always)]
    pub fn extra_width(&self) -> usize {
        self.space().extra_width(self.w)
    }

    #[inline(always)]
    pub fn row(&self, i: usize) -> &[f64] {
        &self.coords[i * self.w..(i + 1) * self.w]
    }

    #[inline(always)]
    pub fn extra_row(&self, i: usize) -> &[f64] {
        let ew = self.extra_width();
        &self.extra[i * ew..(i + 1) * ew]
    }

    /// The pair-space data of point `i`, as [`pair_h`] takes it.
    #[inline(always)]
    pub fn point(&self, i: usize) -> (&[f64], &[f64], f64) {
        (self.row(i), self.extra_row(i), self.aux[i])
    }

    /// `h` of point `i` of `self` and point `j` of `o` from their plain
    /// squared difference `d2` (the tiled kernels' entry).
    #[inline(always)]
    pub fn finish_h(&self, d2: f64, i: usize, o: &Prepared, j: usize) -> f64 {
        let k = &self.curvature;
        pair_h(self.space(), k, pair_scale(self.model, k), d2, self.point(i), o.point(j))
    }

    /// `h = sinh(d/(2R))^2` between point `i` of `self` and point `j` of `o`
    /// (same model and curvature).
    #[inline(always)]
    pub fn half_delta(&self, i: usize, o: &Prepared, j: usize) -> f64 {
        self.finish_h(seq_dist_sq(self.row(i), o.row(j)), i, o, j)
    }

    /// The hyperbolic distance between point `i` and point `j` of `o`.
    #[inline(always)]
    pub fn distance(&self, i: usize, o: &Prepared, j: usize) -> f64 {
        distance_from_h(&self.curvature, self.half_delta(i, o, j))
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
}
