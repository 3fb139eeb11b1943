//! Wrappers for k-means: the whole fit in one core call, and the k-means++
//! seeding alone (for tests of its distribution).

use numpy::IntoPyArray;
use pyo3::exceptions::PyValueError;
use pyo3::prelude::*;

use super::coerce::coerce;
use crate::models::ball::Curvature;
use crate::models::Model;
use crate::stats::kmeans;

/// `fit(x, n_clusters, init, centers, seeds, max_iter, tol, model, curvature)`:
/// `init` is "k-means++", "random" or "given" (then `centers` are used).
/// Returns `(centers, labels, inertia, n_iter, history)`.
#[pyfunction]
#[pyo3(signature = (x, n_clusters, init, centers, seeds, max_iter, tol, model = "poincare", curvature = -1.0))]
#[allow(clippy::type_complexity)]
fn kmeans_fit(
    py: Python<'_>,
    x: &Bound<'_, PyAny>,
    n_clusters: usize,
    init: &str,
    centers: Option<&Bound<'_, PyAny>>,
    seeds: Vec<u64>,
    max_iter: usize,
    tol: f64,
    model: &str,
    curvature: f64,
) -> PyResult<(Py<PyAny>, Py<PyAny>, f64, usize, Vec<f64>)> {
    let k = Curvature::new(curvature)?;
    let md = Model::parse(model, "model")?;
    let xa = coerce(py, "X", x)?;
    let ca = match (init, centers) {
        ("given", Some(c)) => Some(coerce(py, "init", c)?),
        ("given", None) => return Err(PyValueError::new_err("init='given' needs centers")),
        ("k-means++" | "random", _) => None,
        _ => return Err(PyValueError::new_err(format!("unknown init {init:?}"))),
    };
    let random = init == "random";
    let xd = xa.data();
    let cd = ca.as_ref().map(|a| a.data());
    let p = kmeans::Params { n_clusters, max_iter, tol };
    let r = py.detach(move || {
        let init = match cd {
            Some(c) => kmeans::Init::Given(c),
            None if random => kmeans::Init::Random,
            None => kmeans::Init::PlusPlus(kmeans::greedy_trials(n_clusters)),
        };
        kmeans::fit(md, k, &xd, init, &seeds, &p)
    })?;
    let c = ndarray::Array2::from_shape_vec((n_clusters, r.width), r.centers).expect("shape").into_pyarray(py);
    Ok((c.into_any().unbind(), r.labels.into_pyarray(py).into_any().unbind(), r.inertia, r.n_iter, r.history))
}

/// The indices of the points chosen by k-means++ seeding, with `trials`
/// candidates per centre (`None`: the greedy default of the fit; 1: plain
/// k-means++).
#[pyfunction]
#[pyo3(signature = (x, n_clusters, seed, model = "poincare", curvature = -1.0, trials = None))]
fn kmeans_plusplus(
    py: Python<'_>,
    x: &Bound<'_, PyAny>,
    n_clusters: usize,
    seed: u64,
    model: &str,
    curvature: f64,
    trials: Option<usize>,
) -> PyResult<Py<PyAny>> {
    let k = Curvature::new(curvature)?;
    let md = Model::parse(model, "model")?;
    let xa = coerce(py, "X", x)?;
    let xd = xa.data();
    let idx = py.detach(move || {
        kmeans::plusplus_indices(md, k, &xd, n_clusters, trials.unwrap_or(kmeans::greedy_trials(n_clusters)), seed)
    })?;
    let idx: Vec<i64> = idx.into_iter().map(|i| i as i64).collect();
    Ok(idx.into_pyarray(py).into_any().unbind())
}

pub fn register(m: &Bound<'_, PyModule>) -> PyResult<()> {
    m.add_function(wrap_pyfunction!(kmeans_fit, m)?)?;
    m.add_function(wrap_pyfunction!(kmeans_plusplus, m)?)?;
    Ok(())
}
