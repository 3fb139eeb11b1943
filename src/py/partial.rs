//! Centroids from partial sums (gyrokit.dask): the chunk sums, computed
//! where a chunk lives, and the driver that combines them in a fixed order
//! and runs the iteration (`stats::partial`).

use numpy::{IntoPyArray, PyReadonlyArray1, PyReadonlyArray2, PyUntypedArrayMethods};
use pyo3::exceptions::PyValueError;
use pyo3::prelude::*;
use pyo3::types::{PyList, PyTuple};

use super::centroids::{labels_arg, weights_arg};
use super::coerce::coerce;
use crate::models::ball::Curvature;
use crate::models::Model;
use crate::stats::centroids::{to_model, unit_points, Stats};
use crate::stats::kmeans::centre_newton;
use crate::stats::partial::{chunk_sums, Driver, Query, Sums};

fn vec_of(ob: &Bound<'_, PyAny>) -> PyResult<Vec<f64>> {
    let a: PyReadonlyArray1<'_, f64> = ob.extract()?;
    Ok(a.as_array().to_vec())
}

fn query_from(ob: &Bound<'_, PyAny>) -> PyResult<Option<Query>> {
    if ob.is_none() {
        return Ok(None);
    }
    let (kind, mu, gap): (String, Bound<'_, PyAny>, f64) = ob.extract()?;
    let hub = if mu.is_none() { None } else { Some((vec_of(&mu)?, gap)) };
    match (kind.as_str(), hub) {
        ("einstein", c) => Ok(Some(Query::Einstein(c))),
        ("stats", Some(h)) => Ok(Some(Query::Stats(h))),
        _ => Err(PyValueError::new_err(format!("not a centroid query: {kind:?}"))),
    }
}

fn query_to(py: Python<'_>, q: Option<Query>) -> PyResult<Py<PyAny>> {
    let hub = |h: Option<(Vec<f64>, f64)>| -> (Py<PyAny>, f64) {
        match h {
            Some((v, g)) => (v.into_pyarray(py).into_any().unbind(), g),
            None => (py.None(), 0.0),
        }
    };
    Ok(match q {
        None => py.None(),
        Some(Query::Einstein(c)) => {
            let (m, g) = hub(c);
            ("einstein", m, g).into_pyobject(py)?.into_any().unbind()
        }
        Some(Query::Stats(h)) => {
            let (m, g) = hub(Some(h));
            ("stats", m, g).into_pyobject(py)?.into_any().unbind()
        }
    })
}

fn sums_to(py: Python<'_>, s: Option<Sums>) -> PyResult<Py<PyAny>> {
    Ok(match s {
        None => py.None(),
        Some(Sums::Einstein { num, den, first }) => {
            let (fp, fg) = match first {
                Some((p, g)) => (p.into_pyarray(py).into_any().unbind(), g),
                None => (py.None(), 0.0),
            };
            ("einstein", num.into_pyarray(py), den, fp, fg).into_pyobject(py)?.into_any().unbind()
        }
        Some(Sums::Stats(st)) => ("stats", st.grad.into_pyarray(py), st.hout.into_pyarray(py), st.hscal, st.f, st.wsum)
            .into_pyobject(py)?
            .into_any()
            .unbind(),
    })
}

fn sums_from(ob: &Bound<'_, PyAny>) -> PyResult<Option<Sums>> {
    if ob.is_none() {
        return Ok(None);
    }
    let t = ob.cast::<PyTuple>()?;
    let kind: String = t.get_item(0)?.extract()?;
    match kind.as_str() {
        "einstein" => {
            let fp = t.get_item(3)?;
            let first = if fp.is_none() { None } else { Some((vec_of(&fp)?, t.get_item(4)?.extract()?)) };
            Ok(Some(Sums::Einstein { num: vec_of(&t.get_item(1)?)?, den: t.get_item(2)?.extract()?, first }))
        }
        "stats" => Ok(Some(Sums::Stats(Stats {
            grad: vec_of(&t.get_item(1)?)?,
            hout: vec_of(&t.get_item(2)?)?,
            hscal: t.get_item(3)?.extract()?,
            f: t.get_item(4)?.extract()?,
            wsum: t.get_item(5)?.extract()?,
        }))),
        _ => Err(PyValueError::new_err(format!("not centroid sums: {kind:?}"))),
    }
}

/// The sums of one chunk answering every group's query (None: no query).
/// `labels` are group numbers `0..len(queries)`; `wmax` the largest weight
/// of the whole data. Rows in errors are rows of the chunk.
#[pyfunction]
#[pyo3(signature = (x, weights, wmax, labels, queries, model = "poincare", curvature = -1.0))]
#[allow(clippy::too_many_arguments)]
fn centroid_chunk_sums(
    py: Python<'_>,
    x: &Bound<'_, PyAny>,
    weights: Option<&Bound<'_, PyAny>>,
    wmax: f64,
    labels: Option<&Bound<'_, PyAny>>,
    queries: &Bound<'_, PyList>,
    model: &str,
    curvature: f64,
) -> PyResult<Py<PyAny>> {
    let k = Curvature::new(curvature)?;
    let md = Model::parse(model, "model")?;
    let xa = coerce(py, "x", x)?;
    let w = weights_arg(py, weights)?;
    let l = labels_arg(py, labels)?;
    let qs: Vec<Option<Query>> = queries.iter().map(|q| query_from(&q)).collect::<PyResult<_>>()?;
    let xd = xa.data();
    let res = py.detach(move || chunk_sums(md, &k, &xd, w.as_deref(), wmax, l.as_deref(), &qs))?;
    let out = PyList::empty(py);
    for s in res {
        out.append(sums_to(py, s)?)?;
    }
    Ok(out.into_any().unbind())
}

/// One driver per group: the Einstein midpoint, or the Fréchet mean started
/// there (`newton`).
#[pyclass(module = "gyrokit._native", name = "CentroidDriver")]
struct CentroidDriver {
    groups: Vec<Driver>,
}

#[pymethods]
impl CentroidDriver {
    #[new]
    #[pyo3(signature = (groups, newton, tol = 1e-12, max_iter = 50))]
    fn new(groups: usize, newton: bool, tol: f64, max_iter: usize) -> PyResult<Self> {
        if newton && !(tol >= 0.0) {
            return Err(PyValueError::new_err(format!("tol must be >= 0, got {tol}")));
        }
        let nt = if newton { Some((tol, max_iter)) } else { None };
        Ok(CentroidDriver { groups: (0..groups).map(|_| Driver::new(nt)).collect() })
    }

    /// One driver per centre (rows of `centres`, points of `model`), already
    /// in Newton's iteration there, with the stopping rule of k-means'
    /// intermediate centres (gyrokit.dask.KMeans's update step).
    #[staticmethod]
    #[pyo3(signature = (centres, model = "poincare", curvature = -1.0))]
    fn lloyd(py: Python<'_>, centres: &Bound<'_, PyAny>, model: &str, curvature: f64) -> PyResult<Self> {
        let k = Curvature::new(curvature)?;
        let md = Model::parse(model, "model")?;
        let ca = coerce(py, "centres", centres)?;
        let cd = ca.data();
        let pts = unit_points(md, &k, "centres", &cd)?;
        let d = pts.d;
        let groups = (0..pts.n)
            .map(|j| Driver::from_newton(centre_newton(pts.p[j * d..(j + 1) * d].to_vec(), pts.g[j])))
            .collect();
        Ok(CentroidDriver { groups })
    }

    /// Every group's query (None when done); all None when finished.
    fn queries(&self, py: Python<'_>) -> PyResult<Py<PyAny>> {
        let out = PyList::empty(py);
        for g in &self.groups {
            out.append(query_to(py, g.query())?)?;
        }
        Ok(out.into_any().unbind())
    }

    /// Feeds the chunk sums of one round, chunks in input order (each a list
    /// with one entry per group), added in that order.
    fn feed(&mut self, chunks: &Bound<'_, PyList>) -> PyResult<()> {
        let d_of = |q: &Query| match q {
            Query::Einstein(Some((v, _))) | Query::Stats((v, _)) => Some(v.len()),
            Query::Einstein(None) => None,
        };
        let mut tot: Vec<Option<Sums>> = vec![None; self.groups.len()];
        for ch in chunks.iter() {
            let ch = ch.cast::<PyList>()?;
            if ch.len() != self.groups.len() {
                return Err(PyValueError::new_err("chunk sums do not have one entry per group"));
            }
            for (gi, s) in ch.iter().enumerate() {
                if let Some(s) = sums_from(&s)? {
                    match &mut tot[gi] {
                        Some(t) => t.add(&s),
                        None => tot[gi] = Some(s),
                    }
                }
            }
        }
        for (g, t) in self.groups.iter_mut().zip(tot) {
            let Some(q) = g.query() else { continue };
            let s = match t {
                Some(s) => s,
                // No chunk had members of this group: the sums of nothing.
                None => Sums::zero(&q, d_of(&q).unwrap_or(0)),
            };
            g.feed(s);
        }
        Ok(())
    }

    /// `(means (groups, width), iterations, converged, grad_norm)`; a group
    /// without positive weight is named by its number in the ValueError, or,
    /// with `keep` (`(groups, width)` points of the model), gets its row of
    /// `keep` unchanged.
    #[pyo3(signature = (d, model, curvature, keep = None))]
    fn result(
        &self,
        py: Python<'_>,
        d: usize,
        model: &str,
        curvature: f64,
        keep: Option<PyReadonlyArray2<'_, f64>>,
    ) -> PyResult<Py<PyAny>> {
        let k = Curvature::new(curvature)?;
        let md = Model::parse(model, "model")?;
        let width = md.width(d);
        let n = self.groups.len();
        let mut mean = vec![0f64; n * width];
        let (mut it, mut conv, mut gn) = (Vec::new(), Vec::new(), Vec::new());
        for (gi, g) in self.groups.iter().enumerate() {
            if !g.is_done() {
                return Err(PyValueError::new_err("the iteration has not finished"));
            }
            let row = &mut mean[gi * width..(gi + 1) * width];
            let Some(r) = g.result() else {
                match &keep {
                    Some(kp) if kp.shape() == [n, width] => {
                        row.iter_mut().zip(kp.as_array().row(gi)).for_each(|(a, b)| *a = *b);
                        it.push(0);
                        conv.push(true);
                        gn.push(f64::NAN);
                        continue;
                    }
                    Some(_) => return Err(PyValueError::new_err(format!("keep must have shape ({n}, {width})"))),
                    None => return Err(PyValueError::new_err(format!("empty group {gi}"))),
                }
            };
            to_model(md, &k, &r.mu, r.gap, row);
            it.push(r.iterations as i64);
            conv.push(r.converged);
            gn.push(r.grad_norm);
        }
        let mean = ndarray::Array2::from_shape_vec((n, width), mean).expect("shape").into_pyarray(py);
        Ok((mean, it.into_pyarray(py), conv.into_pyarray(py), gn.into_pyarray(py))
            .into_pyobject(py)?
            .into_any()
            .unbind())
    }
}

pub fn register(m: &Bound<'_, PyModule>) -> PyResult<()> {
    m.add_function(wrap_pyfunction!(centroid_chunk_sums, m)?)?;
    m.add_class::<CentroidDriver>()?;
    Ok(())
}
