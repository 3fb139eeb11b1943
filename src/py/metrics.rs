//! Wrappers for the embedding quality scores (`metrics`).

use numpy::{IntoPyArray, PyReadonlyArray2};
use pyo3::exceptions::PyValueError;
use pyo3::prelude::*;

use super::coerce::coerce;
use crate::batch::Data;
use crate::metrics::distortion::{distortion as distortion_core, Target};
use crate::metrics::reconstruction::{reconstruction as reconstruction_core, Adjacency};
use crate::models::ball::Curvature;
use crate::models::Model;
use crate::pairwise::Prepared;

/// An `(m, 2)` int64 index array as a row-major vector (the Python layer
/// converts edge lists and graphs to int64 first).
fn index_pairs(a: &PyReadonlyArray2<'_, i64>, name: &str) -> PyResult<Vec<i64>> {
    let v = a.as_array();
    if v.ncols() != 2 {
        return Err(PyValueError::new_err(format!("{name} must have shape (m, 2), got {:?}", v.shape())));
    }
    Ok(v.iter().copied().collect())
}

/// What [`reconstruction`] hands to Python: `(mean_average_precision,
/// mean_rank, average_precision (n,), ranked_nodes, ranked_edges, degrees
/// (n,), targets (E,), ranks (E,))`.
type ReconstructionTuple = (f64, f64, Py<PyAny>, usize, usize, Py<PyAny>, Py<PyAny>, Py<PyAny>);

/// See [`ReconstructionTuple`]: the arcs ranked are node `u` repeated
/// `degrees[u]` times against `targets` (each list ascending), `ranks` theirs.
#[pyfunction]
#[pyo3(signature = (x, edges, model = "poincare", curvature = -1.0, directed = false))]
fn reconstruction<'py>(
    py: Python<'py>,
    x: &Bound<'py, PyAny>,
    edges: PyReadonlyArray2<'py, i64>,
    model: &str,
    curvature: f64,
    directed: bool,
) -> PyResult<ReconstructionTuple> {
    let c = Curvature::new(curvature)?;
    let md = Model::parse(model, "model")?;
    let xa = coerce(py, "x", x)?;
    let e = index_pairs(&edges, "edges")?;
    let xd = xa.data();
    let r = py.detach(move || -> crate::error::Result<_> {
        let px = Prepared::new(md, c, "x", &xd)?;
        let adj = Adjacency::from_edges(px.n, &e, directed)?;
        reconstruction_core(&px, &adj).map(|r| (r, adj))
    })?;
    let (r, adj) = r;
    let degrees: Vec<i64> = adj.indptr.windows(2).map(|w| (w[1] - w[0]) as i64).collect();
    let targets: Vec<i64> = adj.indices.iter().map(|&v| v as i64).collect();
    let ranks: Vec<i64> = r.ranks.iter().map(|&v| v as i64).collect();
    Ok((
        r.mean_average_precision,
        r.mean_rank,
        r.average_precision.into_pyarray(py).into_any().unbind(),
        r.ranked_nodes,
        r.ranked_edges,
        degrees.into_pyarray(py).into_any().unbind(),
        targets.into_pyarray(py).into_any().unbind(),
        ranks.into_pyarray(py).into_any().unbind(),
    ))
}

fn to_f64(d: &Data<'_>) -> ndarray::ArrayD<f64> {
    match d {
        Data::F64(v) | Data::Weak(v) => v.to_owned(),
        Data::F32(v) => v.mapv(f64::from),
    }
}

/// `(mean, worst, scale, pairs)`.
#[pyfunction]
#[pyo3(signature = (x, target, pairs = None, scale = None, model = "poincare", curvature = -1.0))]
fn distortion<'py>(
    py: Python<'py>,
    x: &Bound<'py, PyAny>,
    target: &Bound<'py, PyAny>,
    pairs: Option<PyReadonlyArray2<'py, i64>>,
    scale: Option<f64>,
    model: &str,
    curvature: f64,
) -> PyResult<(f64, f64, f64, usize)> {
    let c = Curvature::new(curvature)?;
    let md = Model::parse(model, "model")?;
    let xa = coerce(py, "x", x)?;
    let ta = coerce(py, "target", target)?;
    let td = ta.data();
    let nd = td.shape().len();
    let p = match &pairs {
        Some(p) => Some(index_pairs(p, "pairs")?),
        None => None,
    };
    match (&p, nd) {
        (None, 2) | (Some(_), 1) => {}
        (None, _) => {
            return Err(PyValueError::new_err(format!(
                "target must be an (n, n) distance matrix, or 1-D with pairs=; got shape {:?}",
                td.shape()
            )))
        }
        (Some(_), _) => {
            return Err(PyValueError::new_err(format!(
                "with pairs=, target must be 1-D (one distance per pair); got shape {:?}",
                td.shape()
            )))
        }
    }
    let xd = xa.data();
    let r = py.detach(move || -> crate::error::Result<_> {
        let px = Prepared::new(md, c, "x", &xd)?;
        match &p {
            None => {
                // Read in place when the matrix is float64 (strided views are fine).
                if let Data::F64(v) | Data::Weak(v) = &td {
                    let v2 = v.view().into_dimensionality::<ndarray::Ix2>().expect("2-D");
                    distortion_core(&px, &Target::Matrix(v2), scale)
                } else {
                    let t = to_f64(&td).into_dimensionality::<ndarray::Ix2>().expect("2-D");
                    distortion_core(&px, &Target::Matrix(t.view()), scale)
                }
            }
            Some(pr) => {
                let t: Vec<f64> = to_f64(&td).iter().copied().collect();
                distortion_core(&px, &Target::Pairs(pr, &t), scale)
            }
        }
    })?;
    Ok((r.mean, r.worst, r.scale, r.pairs))
}

pub fn register(m: &Bound<'_, PyModule>) -> PyResult<()> {
    m.add_function(wrap_pyfunction!(reconstruction, m)?)?;
    m.add_function(wrap_pyfunction!(distortion, m)?)?;
    Ok(())
}
