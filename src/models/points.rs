//! Arrays of points of one model, read row by row: the one reader of
//! `(n, width)` point arrays, behind the pairwise point sets
//! (`pairwise::Prepared`), the centroids and k-means (`stats::centroids::unit_points`).
//!
//! It checks the shape once, hands every row to the caller's per-point
//! reader (`convert::to_hub`, `pairwise::read_pair_point`, ...) as a
//! contiguous float64 slice (borrowed in place when the row is contiguous
//! float64, gathered or widened from float32 otherwise), runs fixed chunks of
//! rows in parallel (results never depend on the thread count), and reports
//! the first bad row through [`row_error`], the one formatter of such
//! messages.

use ndarray::{ArrayView2, Ix2};
use rayon::prelude::*;

use crate::batch::Data;
use crate::error::{row_error, Error, Fault, Result};
use crate::models::Model;

/// A checked 2-D array of points of one model.
pub struct PointArray<'n, 'd, 'a> {
    /// The argument's name in messages.
    pub name: &'n str,
    pub data: &'d Data<'a>,
    /// Number of points.
    pub n: usize,
    /// Coordinates per point as given (`d + 1` on the hyperboloid).
    pub width: usize,
    /// The dimension `d` of the space (at least 1).
    pub d: usize,
}

/// Two-dimensional views of the data, made once per read.
enum Rows<'v> {
    F64(ArrayView2<'v, f64>),
    F32(ArrayView2<'v, f32>),
}

impl<'v> Rows<'v> {
    /// Row `i` as a contiguous float64 slice: borrowed when it is float64
    /// and contiguous, else copied into `buf` (length `width`).
    #[inline(always)]
    fn row<'b>(&'b self, i: usize, buf: &'b mut [f64]) -> &'b [f64] {
        match self {
            Rows::F64(a) => {
                let r = a.row(i);
                if let Some(sl) = r.to_slice() {
                    return sl;
                }
                buf.iter_mut().zip(r.iter()).for_each(|(o, v)| *o = *v);
            }
            Rows::F32(a) => buf.iter_mut().zip(a.row(i).iter()).for_each(|(o, v)| *o = f64::from(*v)),
        }
        buf
    }
}

impl<'n, 'd, 'a> PointArray<'n, 'd, 'a> {
    /// Checks that `x` is a 2-D array `(n, width)` of points of `model`,
    /// with at least one coordinate per point (two on the hyperboloid).
    pub fn new(model: Model, name: &'n str, x: &'d Data<'a>) -> Result<PointArray<'n, 'd, 'a>> {
        let shape = x.shape();
        if shape.len() != 2 {
            return Err(Error::Value(format!("{name} must be a 2-D array of points (n, width); got shape {shape:?}")));
        }
        let (n, width) = (shape[0], shape[1]);
        let min_width = model.width(1);
        if width < min_width {
            return Err(Error::Value(format!(
                "{name} has {width} coordinates per point; {} points need at least {min_width}",
                Model::NAMES[model as usize]
            )));
        }
        let d = width + 1 - min_width;
        Ok(PointArray { name, data: x, n, width, d })
    }

    /// Requires at least one point; `why` completes the message
    /// (`"{name} is empty: {why}"`).
    pub fn non_empty(self, why: &str) -> Result<Self> {
        if self.n == 0 {
            return Err(Error::Value(format!("{} is empty: {why}", self.name)));
        }
        Ok(self)
    }

    /// The whole array as one row-major float64 slice, when it is float64
    /// in C order (borrowed, no copy).
    pub fn as_slice(&self) -> Option<&'d [f64]> {
        match self.data {
            Data::F64(a) | Data::Weak(a) => a.as_slice(),
            Data::F32(_) => None,
        }
    }

    /// Reads every row: `read(part, r, row)` gets row `r` of chunk `c`
    /// (point `c * chunk + r`) with `parts[c]`, the caller's outputs for that
    /// chunk (so `parts` has one entry per chunk of `chunk` rows). Chunks run
    /// in parallel (in the calling thread when there is one); a chunk stops
    /// at its first bad row, and the bad row with the lowest index is the
    /// error, formatted by [`row_error`].
    pub fn read_rows<P: Send>(
        &self,
        chunk: usize,
        parts: Vec<P>,
        read: impl Fn(&mut P, usize, &[f64]) -> std::result::Result<(), Fault> + Sync,
    ) -> Result<()> {
        debug_assert_eq!(parts.len(), self.n.div_ceil(chunk));
        let rows = match self.data {
            Data::F64(a) | Data::Weak(a) => Rows::F64(a.view().into_dimensionality::<Ix2>().expect("2-D")),
            Data::F32(a) => Rows::F32(a.view().into_dimensionality::<Ix2>().expect("2-D")),
        };
        let (n, width) = (self.n, self.width);
        let run = |c: usize, part: &mut P| -> Option<(usize, Fault)> {
            let mut buf = vec![0f64; width];
            let i0 = c * chunk;
            for i in i0..(i0 + chunk).min(n) {
                if let Err(f) = read(part, i - i0, rows.row(i, &mut buf)) {
                    return Some((i, f));
                }
            }
            None
        };
        let bad = if parts.len() <= 1 {
            parts.into_iter().enumerate().find_map(|(c, mut p)| run(c, &mut p))
        } else {
            parts.into_par_iter().enumerate().filter_map(|(c, mut p)| run(c, &mut p)).min_by_key(|b| b.0)
        };
        match bad {
            Some((i, f)) => Err(row_error(self.name, self.data.shape(), &[i], f, self.data.is_f32())),
            None => Ok(()),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::models::ball::{checked_gap, Curvature};
    use ndarray::Array2;

    fn msg(e: Error) -> String {
        e.to_string()
    }

    #[test]
    fn shapes_are_checked_with_the_model_width() {
        let a = Array2::<f64>::zeros((3, 1)).into_dyn();
        let x = Data::F64(a.view());
        assert!(PointArray::new(Model::Poincare, "x", &x).is_ok());
        let m = msg(PointArray::new(Model::Hyperboloid, "x", &x).err().unwrap());
        assert!(m.starts_with("x has 1 coordinates per point; hyperboloid points need at least 2"), "{m}");
        let v = ndarray::Array1::<f64>::zeros(3).into_dyn();
        let m = msg(PointArray::new(Model::Klein, "y", &Data::F64(v.view())).err().unwrap());
        assert!(m.starts_with("y must be a 2-D array of points"), "{m}");
        let e = Array2::<f64>::zeros((0, 2)).into_dyn();
        let m =
            msg(PointArray::new(Model::Poincare, "x", &Data::F64(e.view())).unwrap().non_empty("why").err().unwrap());
        assert_eq!(m, "x is empty: why");
    }

    #[test]
    fn the_first_bad_row_is_reported_whatever_the_chunking() {
        // rows 5 and 2 outside the unit ball; strided float64, float32 and
        // contiguous inputs read the same values
        let mut a = Array2::<f64>::from_shape_fn((9, 2), |(i, j)| 0.05 * (i + j) as f64);
        a[[5, 0]] = 1.5;
        a[[2, 1]] = 2.0;
        let k = Curvature::default();
        let t = a.t().to_owned();
        let a32 = a.mapv(|v| v as f32);
        let inputs = [Data::F64(a.view().into_dyn()), Data::F64(t.t().into_dyn()), Data::F32(a32.view().into_dyn())];
        for x in &inputs {
            for chunk in [1, 2, 4, 16] {
                let pa = PointArray::new(Model::Poincare, "x", x).unwrap();
                let mut g = [0f64; 9];
                let parts: Vec<&mut [f64]> = g.chunks_mut(chunk).collect();
                let m = msg(pa
                    .read_rows(chunk, parts, |gc, r, row| {
                        gc[r] = checked_gap(&k, row)?.value();
                        Ok(())
                    })
                    .err()
                    .unwrap());
                assert!(m.starts_with("x: row 2 is on or outside the ball"), "{m}");
            }
        }
    }
}
