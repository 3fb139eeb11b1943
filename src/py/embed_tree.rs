//! Wrappers for the tree functions: `gyrokit._tree` hands over plain int64
//! arrays (a parent array, `(parent, child)` rows, or undirected edges with
//! a root), the core validates and builds the tree with the GIL released.

use numpy::ndarray::Array2;
use numpy::{IntoPyArray, PyReadonlyArrayDyn};
use pyo3::prelude::*;

use crate::embed::hierarchy;
use crate::embed::tree as embed_tree_core;
use crate::error::{Error, Result};
use crate::metrics::tree_distances as hops;
use crate::models::ball::Curvature;
use crate::models::Model;
use crate::tree::Tree;

/// Builds the tree from `kind` ("parent", "edges" or "undirected") and the
/// C-contiguous int64 data.
fn read_tree(kind: &str, data: &[i64], n: usize, root: i64) -> Result<Tree> {
    let rows = || data.chunks_exact(2).map(|c| [c[0], c[1]]).collect::<Vec<_>>();
    match kind {
        "parent" => Tree::from_parents(data),
        "edges" => Tree::from_edges(n, &rows()),
        "undirected" => Tree::from_undirected(n, &rows(), root),
        _ => Err(Error::Value(format!("unknown tree form {kind:?}"))),
    }
}

fn contiguous<'a>(a: &'a PyReadonlyArrayDyn<'_, i64>, name: &str) -> PyResult<&'a [i64]> {
    a.as_slice().map_err(|_| Error::Value(format!("{name} must be C-contiguous")).into())
}

/// `embed_tree(kind, tree, n, root, dim, scale, model, curvature)` ->
/// `(points, scale)`.
#[pyfunction]
#[pyo3(signature = (kind, tree, n, root, dim, scale, model = "poincare", curvature = -1.0))]
fn embed_tree(
    py: Python<'_>,
    kind: &str,
    tree: PyReadonlyArrayDyn<'_, i64>,
    n: usize,
    root: i64,
    dim: usize,
    scale: Option<f64>,
    model: &str,
    curvature: f64,
) -> PyResult<(Py<PyAny>, f64, Option<f64>)> {
    let k = Curvature::new(curvature)?;
    let md = Model::parse(model, "model")?;
    let data = contiguous(&tree, "tree")?;
    let e = py.detach(|| {
        let t = read_tree(kind, data, n, root)?;
        embed_tree_core::embed(&t, dim, scale, md, k).map(|e| (t.n, e))
    })?;
    let (n, e) = e;
    Ok(embedded(py, n, e, md))
}

/// `(points, scale, beyond)`: `beyond` is the accurate radius, only when the
/// deepest nodes lie beyond it.
fn embedded(py: Python<'_>, n: usize, e: embed_tree_core::Embedded, md: Model) -> (Py<PyAny>, f64, Option<f64>) {
    let beyond = (!e.accurate).then(|| embed_tree_core::accurate_radius(md, e.scale));
    let pts = Array2::from_shape_vec((n, e.width), e.points).expect("shape").into_pyarray(py);
    (pts.into_any().unbind(), e.scale, beyond)
}

/// `embed_hierarchy(rows, n, dim, scale, model, curvature)` -> `(points,
/// scale, beyond)` for `(child, parent)` rows (C-contiguous int64, `(m, 2)`).
#[pyfunction]
#[pyo3(signature = (rows, n, dim, scale, model = "poincare", curvature = -1.0))]
fn embed_hierarchy(
    py: Python<'_>,
    rows: PyReadonlyArrayDyn<'_, i64>,
    n: usize,
    dim: usize,
    scale: Option<f64>,
    model: &str,
    curvature: f64,
) -> PyResult<(Py<PyAny>, f64, Option<f64>)> {
    let k = Curvature::new(curvature)?;
    let md = Model::parse(model, "model")?;
    let data = contiguous(&rows, "edges")?;
    let e = py.detach(|| {
        let r: Vec<[i64; 2]> = data.chunks_exact(2).map(|c| [c[0], c[1]]).collect();
        let h = hierarchy::read(n, &r)?;
        hierarchy::embed(&h, dim, scale, md, k)
    })?;
    Ok(embedded(py, n, e, md))
}

/// `tree_distances(kind, tree, n, root, pairs)`: hop counts, `(p,)` for the
/// `(p, 2)` pairs or `(n, n)`.
#[pyfunction]
#[pyo3(signature = (kind, tree, n, root, pairs = None))]
fn tree_distances(
    py: Python<'_>,
    kind: &str,
    tree: PyReadonlyArrayDyn<'_, i64>,
    n: usize,
    root: i64,
    pairs: Option<PyReadonlyArrayDyn<'_, i64>>,
) -> PyResult<Py<PyAny>> {
    let data = contiguous(&tree, "tree")?;
    let pd = match &pairs {
        Some(p) => Some(contiguous(p, "pairs")?),
        None => None,
    };
    let r = py.detach(|| {
        let t = read_tree(kind, data, n, root)?;
        match pd {
            Some(p) => {
                let rows: Vec<[i64; 2]> = p.chunks_exact(2).map(|c| [c[0], c[1]]).collect();
                hops::pair_hops(&t, &rows).map(|v| (v, None))
            }
            None => hops::all_hops(&t).map(|v| (v, Some(t.n))),
        }
    })?;
    Ok(match r {
        (v, None) => v.into_pyarray(py).into_any().unbind(),
        (v, Some(n)) => Array2::from_shape_vec((n, n), v).expect("shape").into_pyarray(py).into_any().unbind(),
    })
}

pub fn register(m: &Bound<'_, PyModule>) -> PyResult<()> {
    m.add_function(wrap_pyfunction!(embed_tree, m)?)?;
    m.add_function(wrap_pyfunction!(embed_hierarchy, m)?)?;
    m.add_function(wrap_pyfunction!(tree_distances, m)?)?;
    Ok(())
}
