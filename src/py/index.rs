//! pyo3 wrapper of the exact neighbour index (`crate::pairwise::vptree::Index`:
//! a vantage-point tree or brute force, chosen from the data): array coercion
//! in, the GIL released around building and querying, arrays out. The public
//! class with its documentation is `gyrokit.NeighborIndex`
//! (python/gyrokit/_index.py).

use ndarray::Array2;
use numpy::{IntoPyArray, PyArray1, PyArray2, PyReadonlyArray1, PyReadonlyArray2};
use pyo3::exceptions::PyValueError;
use pyo3::prelude::*;

use super::coerce::coerce;
use super::neighbors::{distances_1d, distances_2d};
use crate::batch::{wants_f32, Operand};
use crate::error::Error;
use crate::models::ball::Curvature;
use crate::models::Model;
use crate::pairwise::vptree::{
    prepared_from_parts, prepared_parts, state_width, Engine, Index, Method, VpTree, DEFAULT_LEAF_SIZE,
};
use crate::pairwise::Prepared;

type Knn<'py> = (Bound<'py, PyArray2<i64>>, Bound<'py, PyAny>);
type CsrArrays<'py> = (Bound<'py, PyArray1<i64>>, Bound<'py, PyArray1<i64>>, Bound<'py, PyAny>);

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

/// Exact neighbour index over hyperbolic points, a vantage-point tree or
/// brute force (private; see gyrokit.NeighborIndex). The class keeps its
/// first name, `VpTree`, for the pickles and tests that name it.
#[pyclass(frozen, module = "gyrokit._native", name = "VpTree")]
pub struct PyVpTree {
    index: Index,
    /// Whether the indexed points were float32: distances are float32 when
    /// they and the queries are (the dtype rule of `crate::batch::wants_f32`).
    f32: bool,
}

impl PyVpTree {
    /// Prepares the optional query argument `y` (holding the GIL only for
    /// the coercion; validation runs detached). `f` also learns whether the
    /// distances are to be float32.
    fn with_queries<T: Send>(
        &self,
        py: Python<'_>,
        y: Option<&Bound<'_, PyAny>>,
        f: impl FnOnce(&Index, Option<&Prepared>, bool) -> crate::error::Result<T> + Send,
    ) -> PyResult<T> {
        let index = &self.index;
        match y {
            Some(y) if !y.is_none() => {
                let ya = coerce(py, "y", y)?;
                let yd = ya.data();
                let f32 = self.f32 && wants_f32(&[Operand::point("y", yd.clone())]);
                Ok(py.detach(move || {
                    let q = index.prepare_queries(&yd)?;
                    f(index, Some(&q), f32)
                })?)
            }
            _ => Ok(py.detach(move || f(index, None, self.f32))?),
        }
    }

    fn tree(&self) -> Option<&VpTree> {
        match &self.index.engine {
            Engine::Tree(t) => Some(t),
            Engine::Brute(_) => None,
        }
    }
}

#[pymethods]
impl PyVpTree {
    #[new]
    // leaf_size: literal so that the text signature shows it; equal to
    // DEFAULT_LEAF_SIZE (checked by a test).
    #[pyo3(signature = (x, model = "poincare", curvature = -1.0, leaf_size = 16, method = "auto"))]
    // Spelled out: pyo3 renders the default `-1.0` (an expression) as `...`.
    #[pyo3(text_signature = "(x, model='poincare', curvature=-1.0, leaf_size=16, method='auto')")]
    fn new(
        py: Python<'_>,
        x: &Bound<'_, PyAny>,
        model: &str,
        curvature: f64,
        leaf_size: i64,
        method: &str,
    ) -> PyResult<Self> {
        let m = Model::parse(model, "model")?;
        let c = Curvature::new(curvature)?;
        let leaf = positive("leaf_size", leaf_size)?;
        let how = Method::parse(method)?;
        let xa = coerce(py, "x", x)?;
        let xd = xa.data();
        let f32 = wants_f32(&[Operand::point("x", xd.clone())]);
        let index = py.detach(move || Index::new(m, c, "x", &xd, leaf, how))?;
        Ok(PyVpTree { index, f32 })
    }

    /// `(indices (m, k) int64, distances (m, k))`, distances float32 when
    /// the indexed points and `y` are float32, float64 otherwise.
    #[pyo3(signature = (y = None, k = 10))]
    fn query<'py>(&self, py: Python<'py>, y: Option<&Bound<'py, PyAny>>, k: i64) -> PyResult<Knn<'py>> {
        let k = positive("k", k)?;
        let (m, idx, dist, f32) = self.with_queries(py, y, move |t, q, f32| {
            let m = q.map_or(t.n(), |q| q.n);
            let (i, d) = t.query(q, k)?;
            Ok((m, i, d, f32))
        })?;
        Ok((to_2d(py, m, k, idx)?, distances_2d(py, m, k, dist, f32)?))
    }

    /// `(indptr (m + 1,) int64, indices int64, distances)` (dtype as in
    /// `query`).
    #[pyo3(signature = (y, r))]
    fn query_radius<'py>(&self, py: Python<'py>, y: Option<&Bound<'py, PyAny>>, r: f64) -> PyResult<CsrArrays<'py>> {
        let (csr, f32) = self.with_queries(py, y, move |t, q, f32| Ok((t.query_radius(q, r)?, f32)))?;
        Ok((csr.indptr.into_pyarray(py), csr.indices.into_pyarray(py), distances_1d(py, csr.distances, f32)?))
    }

    /// Every distance the index would report, `(m, n)` float64 (brute
    /// force, for tests).
    #[pyo3(signature = (y = None))]
    fn distances<'py>(&self, py: Python<'py>, y: Option<&Bound<'py, PyAny>>) -> PyResult<Bound<'py, PyArray2<f64>>> {
        let (m, d) = self.with_queries(py, y, |t, q, _| Ok((q.map_or(t.n(), |q| q.n), t.distances(q)?)))?;
        to_2d(py, m, self.index.n(), d)
    }

    /// Mean pair evaluations of the tree per `k`-nearest search of
    /// `samples` indexed points, as a fraction of n (the figure `auto`
    /// decides on); None when the index holds no tree.
    #[pyo3(signature = (k = 10, samples = 64))]
    fn visited_fraction(&self, py: Python<'_>, k: i64, samples: i64) -> PyResult<Option<f64>> {
        let k = positive("k", k)?;
        let s = positive("samples", samples)?;
        Ok(self.tree().map(|t| py.detach(|| t.visited_fraction(k, s, 1.0))))
    }

    /// The fraction measured when `auto` chose the method (NaN otherwise).
    #[getter]
    fn auto_visited(&self) -> f64 {
        self.index.visited
    }

    /// The method in use: "tree" or "brute".
    #[getter]
    fn method(&self) -> &'static str {
        self.index.method().name()
    }

    /// Whether distances are float32 for float32 queries (the indexed
    /// points were float32).
    #[getter]
    fn float32(&self) -> bool {
        self.f32
    }

    #[getter]
    fn n(&self) -> usize {
        self.index.n()
    }

    #[getter]
    fn model(&self) -> &'static str {
        model_name(self.index.points().model)
    }

    #[getter]
    fn curvature(&self) -> f64 {
        self.index.points().curvature.k
    }

    #[getter]
    fn leaf_size(&self) -> usize {
        self.index.leaf_size
    }

    /// Coordinates per point as given (d + 1 for the hyperboloid).
    #[getter]
    fn width(&self) -> usize {
        let p = self.index.points();
        p.model.width(p.w)
    }

    /// The core's default leaf size.
    #[classattr]
    fn default_leaf_size() -> usize {
        DEFAULT_LEAF_SIZE
    }

    #[getter]
    fn nbytes(&self) -> usize {
        self.index.nbytes()
    }

    fn __len__(&self) -> usize {
        self.index.n()
    }

    /// The whole index as a tuple of plain values and arrays (for
    /// pickling). A tree: `(version, model, curvature, leaf_size, coords
    /// (n, w), aux (n,), perm (n,), nodes (n_nodes, 3) int64, bounds
    /// (n_nodes, 4))`; brute force: `(version, model, curvature, leaf_size,
    /// coords (n, w), aux (n,))`. `float32` is saved beside it.
    fn state<'py>(&self, py: Python<'py>) -> PyResult<Bound<'py, pyo3::types::PyTuple>> {
        let p = self.index.points();
        let mut items: Vec<Bound<'py, PyAny>> = vec![
            STATE_VERSION.into_pyobject(py)?.into_any(),
            model_name(p.model).into_pyobject(py)?.into_any(),
            p.curvature.k.into_pyobject(py)?.into_any(),
            self.index.leaf_size.into_pyobject(py)?.into_any(),
        ];
        match &self.index.engine {
            Engine::Tree(t) => {
                let (coords, aux, perm, ints, bounds) = py.detach(|| t.to_parts());
                let nn = t.nodes.len();
                items.extend([
                    to_2d(py, t.n(), state_width(p), coords)?.into_any(),
                    aux.into_pyarray(py).into_any(),
                    perm.into_pyarray(py).into_any(),
                    to_2d(py, nn, 3, ints)?.into_any(),
                    to_2d(py, nn, 4, bounds)?.into_any(),
                ]);
            }
            Engine::Brute(pts) => {
                let (coords, aux) = py.detach(|| prepared_parts(pts));
                items.extend([to_2d(py, pts.n, state_width(p), coords)?.into_any(), aux.into_pyarray(py).into_any()]);
            }
        }
        pyo3::types::PyTuple::new(py, items)
    }

    /// Rebuilds a tree index from `state()` without rebuilding the tree; the
    /// state is checked (a corrupted one is a ValueError).
    #[staticmethod]
    #[pyo3(signature = (version, model, curvature, leaf_size, coords, aux, perm, nodes, bounds, float32 = false))]
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
        float32: bool,
    ) -> PyResult<Self> {
        let (m, c, leaf) = state_head(version, model, curvature, leaf_size)?;
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
        let index = Index { engine: Engine::Tree(tree), leaf_size: leaf, visited: f64::NAN };
        Ok(PyVpTree { index, f32: float32 })
    }

    /// Rebuilds a brute-force index from `state()`, checked like
    /// `from_state`.
    #[staticmethod]
    #[pyo3(signature = (version, model, curvature, leaf_size, coords, aux, float32 = false))]
    fn from_points_state(
        py: Python<'_>,
        version: i64,
        model: &str,
        curvature: f64,
        leaf_size: i64,
        coords: PyReadonlyArray2<'_, f64>,
        aux: PyReadonlyArray1<'_, f64>,
        float32: bool,
    ) -> PyResult<Self> {
        let (m, c, leaf) = state_head(version, model, curvature, leaf_size)?;
        let (co, au) = (coords.as_array(), aux.as_array());
        let w = co.ncols();
        let pts = py.detach(move || {
            let co: Vec<f64> = co.iter().copied().collect();
            let au: Vec<f64> = au.iter().copied().collect();
            prepared_from_parts(m, c, w, co, au)
        })?;
        let index = Index { engine: Engine::Brute(pts), leaf_size: leaf, visited: f64::NAN };
        Ok(PyVpTree { index, f32: float32 })
    }
}

/// The common fields of a saved state, checked.
fn state_head(version: i64, model: &str, curvature: f64, leaf_size: i64) -> PyResult<(Model, Curvature, usize)> {
    if version != STATE_VERSION {
        return Err(PyValueError::new_err(format!(
            "invalid NeighborIndex state: layout version {version}, this gyrokit reads version {STATE_VERSION}"
        )));
    }
    Ok((Model::parse(model, "model")?, Curvature::new(curvature)?, positive("leaf_size", leaf_size)?))
}

pub fn register(m: &Bound<'_, PyModule>) -> PyResult<()> {
    m.add_class::<PyVpTree>()?;
    Ok(())
}
