//! Wrapper of the graph-embedding trainer (`crate::embed::graph`): the
//! trainer lives in a Python object so that the public function
//! (`gyrokit.embed.graph`, python/gyrokit/_graph_embed.py) can run it a slice
//! of an epoch per call, update its progress bar and react to Ctrl-C between
//! calls. Each call releases the GIL.

use std::sync::Mutex;

use ndarray::Array2;
use numpy::{IntoPyArray, PyArray2, PyReadonlyArray1, PyReadonlyArray2};
use pyo3::exceptions::PyValueError;
use pyo3::prelude::*;

use crate::embed::graph::{loss_and_gradient, Graph, Params, Trainer};
use crate::models::ball::Curvature;
use crate::models::Model;
use crate::py::coerce::coerce_opt;

#[pyclass(frozen, module = "gyrokit._native", name = "GraphTrainer")]
pub struct GraphTrainer {
    inner: Mutex<Trainer>,
    n: usize,
}

impl GraphTrainer {
    fn lock(&self) -> std::sync::MutexGuard<'_, Trainer> {
        // A panic inside a call leaves no half-written state visible to
        // Python (batches write the points only at their end): recover.
        self.inner.lock().unwrap_or_else(|e| e.into_inner())
    }
}

#[pymethods]
impl GraphTrainer {
    /// `edges` is a C-contiguous `(m, 2)` int64 array; `init`, when given,
    /// the starting points (`(n_nodes, width)` points of `model`).
    #[new]
    #[pyo3(signature = (edges, n_nodes, dim, model, curvature, negatives, learning_rate, burn_in, burn_in_factor, batch_size, init_scale, seed, directed = false, node_mean = false, decay_epochs = 0, degree_epochs = 0, degree_power = 0.75, radial_search = false, init = None, hard_negatives = 0, hard_pool = 128, hard_every = 5))]
    fn new(
        py: Python<'_>,
        edges: PyReadonlyArray2<'_, i64>,
        n_nodes: usize,
        dim: usize,
        model: &str,
        curvature: f64,
        negatives: usize,
        learning_rate: f64,
        burn_in: usize,
        burn_in_factor: f64,
        batch_size: usize,
        init_scale: f64,
        seed: u64,
        directed: bool,
        node_mean: bool,
        decay_epochs: usize,
        degree_epochs: usize,
        degree_power: f64,
        radial_search: bool,
        init: Option<&Bound<'_, PyAny>>,
        hard_negatives: usize,
        hard_pool: usize,
        hard_every: usize,
    ) -> PyResult<Self> {
        let k = Curvature::new(curvature)?;
        let md = Model::parse(model, "model")?;
        let e = edges.as_array();
        if e.ncols() != 2 {
            return Err(PyValueError::new_err(format!("edges must have shape (m, 2), got {:?}", e.shape())));
        }
        let rows: Vec<[i64; 2]> = e.rows().into_iter().map(|r| [r[0], r[1]]).collect();
        let p = Params {
            dim,
            negatives,
            learning_rate,
            burn_in,
            burn_in_factor,
            batch_size,
            init_scale,
            seed,
            node_mean,
            degree_epochs,
            degree_power,
            decay_epochs,
            radial_search,
            hard_negatives,
            hard_pool,
            hard_every,
        };
        let start = coerce_opt(py, "init", init)?;
        let sd = start.as_ref().map(|a| a.data());
        let t = py.detach(move || {
            let g = Graph::new(n_nodes, &rows, directed)?;
            Trainer::new(md, k, g, p, sd.as_ref())
        })?;
        Ok(GraphTrainer { inner: Mutex::new(t), n: n_nodes })
    }

    /// Runs whole batches until at least `max_edges` positives are done or
    /// the epoch ends; returns `(positives done, mean loss of the epoch if
    /// this call finished one)`.
    fn run(&self, py: Python<'_>, max_edges: usize) -> (usize, Option<f64>) {
        let r = py.detach(|| self.lock().run(max_edges));
        (r.edges, r.epoch_loss)
    }

    /// The points `(n, d)` (`(n, d + 1)` on the hyperboloid).
    fn points<'py>(&self, py: Python<'py>) -> Bound<'py, PyArray2<f64>> {
        let (pts, w) = py.detach(|| {
            let t = self.lock();
            (t.points(), t.width())
        });
        Array2::from_shape_vec((self.n, w), pts).expect("shape").into_pyarray(py)
    }

    #[getter]
    fn epoch(&self) -> usize {
        self.lock().epoch()
    }
    /// The mean loss of every completed epoch.
    #[getter]
    fn losses(&self) -> Vec<f64> {
        self.lock().losses().to_vec()
    }
    #[getter]
    fn position(&self) -> usize {
        self.lock().position()
    }
    #[getter]
    fn n_edges(&self) -> usize {
        self.lock().n_edges()
    }
    /// Steps halved at the rim of the float64 ball so far.
    #[getter]
    fn shortened(&self) -> u64 {
        self.lock().shortened()
    }
    /// The radial factors of the line searches so far (one per epoch after
    /// burn-in; 1.0 where none lowered the loss).
    #[getter]
    fn scales(&self) -> Vec<f64> {
        self.lock().scales().to_vec()
    }
}

/// The loss of the positive `(u, targets[0])` against the negatives
/// `targets[1:]` and its Riemannian gradient at `[u, *targets]`, by the
/// training kernel (for tests against an independent reference).
#[pyfunction]
#[pyo3(signature = (points, u, targets, model = "poincare", curvature = -1.0))]
fn graph_loss_gradient<'py>(
    py: Python<'py>,
    points: PyReadonlyArray2<'py, f64>,
    u: usize,
    targets: PyReadonlyArray1<'py, i64>,
    model: &str,
    curvature: f64,
) -> PyResult<(f64, Bound<'py, PyArray2<f64>>)> {
    let k = Curvature::new(curvature)?;
    let md = Model::parse(model, "model")?;
    let a = points.as_array();
    let w = a.ncols();
    let dim = if md == Model::Hyperboloid { w.saturating_sub(1) } else { w };
    if dim < 1 {
        return Err(PyValueError::new_err("points must have at least one coordinate per point"));
    }
    let flat: Vec<f64> = a.iter().copied().collect();
    let mut ts = Vec::new();
    for &t in targets.as_array() {
        if t < 0 {
            return Err(PyValueError::new_err(format!("targets: negative node id {t}")));
        }
        ts.push(t as usize);
    }
    let (loss, g) = py.detach(|| loss_and_gradient(md, k, dim, &flat, u, &ts))?;
    let rows = g.len() / w;
    Ok((loss, Array2::from_shape_vec((rows, w), g).expect("shape").into_pyarray(py)))
}

pub fn register(m: &Bound<'_, PyModule>) -> PyResult<()> {
    m.add_class::<GraphTrainer>()?;
    m.add_function(wrap_pyfunction!(graph_loss_gradient, m)?)?;
    Ok(())
}
