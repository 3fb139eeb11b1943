//! pyo3 wrapper of the metric-tree neighbour index (`crate::pairwise::vptree`): array
//! coercion in, the GIL released around building and querying, arrays out.
//! The public class with its documentation is `gyrokit.NeighborIndex`
//! (python/gyrokit/_index.py).

use ndarray::Array2;
use numpy::{IntoPyArray, PyArray1, PyArray2, PyReadonlyArray1, PyReadonlyArray2};
use pyo3::exceptions::PyValueError;
use pyo3::prelude::*;

use super::coerce::coerce;
use crate::error::Error;
use crate::models::ball::Curvature;
use crate::models::Model;
use crate::pairwise::vptree::{VpTree, DEFAULT_LEAF_SIZE};
use crate::pairwise::Prepared;

type Knn<'py> = (Bound<'py, PyArray2<i64>>, Bound<'py, PyArray2<f64>>);
type CsrArrays<'py> = (Bound<'py, PyArray1<i64>>, Bound<'py, PyArray1<i64>>, Bound<'py, PyArray1<f64>>);

/// Version of the pickled state layout.
const STATE_VERSION: i64 = 2;

fn model_name(m: Model) -> &'static str {
    match m {
        Model::Poincare => "poincare",
        Model::Klein => "klein",
        Model::Hyperboloid => "hyperboloid",
        Model::HalfSpace => "halfspace",
    }
}

/// A count argument (`k`, `leaf_size`) as a positive integer.
fn positive(name: &str, v: i64) -> Result<usize, Error> {
    if v < 1 {
        return Err(Error::Value(format!("{name} must be at least 1, got {v}")));
    }
    usize::try_from(v).map_err(|_| Error::Value(format!("{name} = {v} is too large")))
}

fn to_2d<T: numpy::Element>(py: Python<'_>, rows: usize, cols: usize, v: Vec<T>) -> PyResult<Bound<'_, PyArray2<T>>> {
    let a = Array2::from_shape_vec((rows, cols), v)
        .map_err(|e| PyValueError::new_err(format!("internal error: result shape ({rows}, {cols}): {e}")))?;
    Ok(a.into_pyarray(py))
}

/// Exact vantage-point tree over hyperbolic points (private; see
/// gyrokit.NeighborIndex).
#[pyclass(frozen, module = "gyrokit._native", name = "VpTree")]
pub struct PyVpTree {
    tree: VpTree,
}

impl PyVpTree {
    /// Prepares the optional query argument `y` (holding the GIL only for
    /// the coercion; validation runs detached).
    fn with_queries<T: Send>(
        &self,
        py: Python<'_>,
        y: Option<&Bound<'_, PyAny>>,
        f: impl FnOnce(&VpTree, Option<&Prepared>) -> crate::error::Result<T> + Send,
    ) -> PyResult<T> {
        let tree = &self.tree;
        match y {
            Some(y) if !y.is_none() => {
                let ya = coerce(py, "y", y)?;
                let yd = ya.data();
                Ok(py.detach(move || {
                    let q = tree.prepare_queries(&yd)?;
                    f(tree, Some(&q))
                })?)
            }
            _ => Ok(py.detach(move || f(tree, None))?),
        }
    }
}

#[pymethods]
impl PyVpTree {
    #[new]
    // leaf_size: literal so that the text signature shows it; equal to
    // DEFAULT_LEAF_SIZE (checked by a test).
    #[pyo3(signature = (x, model = "poincare", curvature = -1.0, leaf_size = 16))]
    // Spelled out: pyo3 renders the default `-1.0` (an expression) as `...`.
    #[pyo3(text_signature = "(x, model='poincare', curvature=-1.0, leaf_size=16)")]
    fn new(py: Python<'_>, x: &Bound<'_, PyAny>, model: &str, curvature: f64, leaf_size: i64) -> PyResult<Self> {
        let m = Model::parse(model, "model")?;
        let c = Curvature::new(curvature)?;
        let leaf = positive("leaf_size", leaf_size)?;
        let xa = coerce(py, "x", x)?;
        let xd = xa.data();
        let tree = py.detach(move || VpTree::new(m, c, "x", &xd, leaf))?;
        Ok(PyVpTree { tree })
    }

    /// `(indices (m, k) int64, distances (m, k) float64)`.
    #[pyo3(signature = (y = None, k = 10))]
    fn query<'py>(&self, py: Python<'py>, y: Option<&Bound<'py, PyAny>>, k: i64) -> PyResult<Knn<'py>> {
        let k = positive("k", k)?;
        let (m, idx, dist) = self.with_queries(py, y, move |t, q| {
            let m = q.map_or(t.n(), |q| q.n);
            let (i, d) = t.query(q, k)?;
            Ok((m, i, d))
        })?;
        Ok((to_2d(py, m, k, idx)?, to_2d(py, m, k, dist)?))
    }

    /// `(indptr (m + 1,) int64, indices int64, distances float64)`.
    #[pyo3(signature = (y, r))]
    fn query_radius<'py>(&self, py: Python<'py>, y: Option<&Bound<'py, PyAny>>, r: f64) -> PyResult<CsrArrays<'py>> {
        let csr = self.with_queries(py, y, move |t, q| t.query_radius(q, r))?;
        Ok((csr.indptr.into_pyarray(py), csr.indices.into_pyarray(py), csr.distances.into_pyarray(py)))
    }

    /// Every distance the index would report, `(m, n)` (brute force, for
    /// tests).
    #[pyo3(signature = (y = None))]
    fn distances<'py>(&self, py: Python<'py>, y: Option<&Bound<'py, PyAny>>) -> PyResult<Bound<'py, PyArray2<f64>>> {
        let (m, d) = self.with_queries(py, y, |t, q| Ok((q.map_or(t.n(), |q| q.n), t.distances(q)?)))?;
        to_2d(py, m, self.tree.n(), d)
    }

    #[getter]
    fn n(&self) -> usize {
        self.tree.n()
    }

    #[getter]
    fn model(&self) -> &'static str {
        model_name(self.tree.points.model)
    }

    #[getter]
    fn curvature(&self) -> f64 {
        self.tree.points.curvature.k
    }

    #[getter]
    fn leaf_size(&self) -> usize {
        self.tree.leaf_size
    }

    /// Coordinates per point as given (d + 1 for the hyperboloid).
    #[getter]
    fn width(&self) -> usize {
        self.tree.points.model.width(self.tree.points.w)
    }

    /// The core's default leaf size.
    #[classattr]
    fn default_leaf_size() -> usize {
        DEFAULT_LEAF_SIZE
    }

    #[getter]
    fn nbytes(&self) -> usize {
        self.tree.nbytes()
    }

    fn __len__(&self) -> usize {
        self.tree.n()
    }

    /// The whole tree as a tuple of plain values and arrays (for pickling):
    /// `(version, model, curvature, leaf_size, coords (n, w), aux (n,),
    /// perm (n,), nodes (n_nodes, 3) int64, bounds (n_nodes, 4))`.
    fn state<'py>(&self, py: Python<'py>) -> PyResult<Bound<'py, pyo3::types::PyTuple>> {
        let t = &self.tree;
        let (coords, aux, perm, ints, bounds) = py.detach(|| t.to_parts());
        let nn = t.nodes.len();
        let items: Vec<Bound<'py, PyAny>> = vec![
            STATE_VERSION.into_pyobject(py)?.into_any(),
            model_name(t.points.model).into_pyobject(py)?.into_any(),
            t.points.curvature.k.into_pyobject(py)?.into_any(),
            t.leaf_size.into_pyobject(py)?.into_any(),
            to_2d(py, t.n(), t.state_width(), coords)?.into_any(),
            aux.into_pyarray(py).into_any(),
            perm.into_pyarray(py).into_any(),
            to_2d(py, nn, 3, ints)?.into_any(),
            to_2d(py, nn, 4, bounds)?.into_any(),
        ];
        pyo3::types::PyTuple::new(py, items)
    }

    /// Rebuilds an index from `state()` without rebuilding the tree; the
    /// state is checked (a corrupted one is a ValueError).
    #[staticmethod]
    fn from_state(
        py: Python<'_>,
        version: i64,
        model: &str,
        curvature: f64,
        leaf_size: i64,
        coords: PyReadonlyArray2<'_, f64>,
        aux: PyReadonlyArray1<'_, f64>,
        perm: PyReadonlyArray1<'_, i64>,
        nodes: PyReadonlyArray2<'_, i64>,
        bounds: PyReadonlyArray2<'_, f64>,
    ) -> PyResult<Self> {
        if version != STATE_VERSION {
            return Err(PyValueError::new_err(format!(
                "invalid NeighborIndex state: layout version {version}, this gyrokit reads version {STATE_VERSION}"
            )));
        }
        let m = Model::parse(model, "model")?;
        let c = Curvature::new(curvature)?;
        let leaf = positive("leaf_size", leaf_size)?;
        let (co, au, pe) = (coords.as_array(), aux.as_array(), perm.as_array());
        let (no, bo) = (nodes.as_array(), bounds.as_array());
        if no.ncols() != 3 || bo.ncols() != 4 {
            return Err(PyValueError::new_err("invalid NeighborIndex state: node arrays must have 3 and 4 columns"));
        }
        let w = co.ncols();
        let tree = py.detach(move || {
            // Logical (row-major) order whatever the arrays' memory layout.
            let co: Vec<f64> = co.iter().copied().collect();
            let au: Vec<f64> = au.iter().copied().collect();
            let pe: Vec<i64> = pe.iter().copied().collect();
            let no: Vec<i64> = no.iter().copied().collect();
            let bo: Vec<f64> = bo.iter().copied().collect();
            VpTree::from_parts(m, c, leaf, w, co, au, &pe, &no, &bo)
        })?;
        Ok(PyVpTree { tree })
    }
}

pub fn register(m: &Bound<'_, PyModule>) -> PyResult<()> {
    m.add_class::<PyVpTree>()?;
    Ok(())
}
