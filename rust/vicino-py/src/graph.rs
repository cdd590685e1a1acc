//! Audit facts, algebra and repairs of a weights matrix.

use crate::convert::{csr_out, slice, CsrArgs, CsrOut};
use crate::errors::run;
use numpy::{IntoPyArray, PyArray1, PyArray2, PyArrayMethods, PyReadonlyArray1};
use pyo3::prelude::*;
use vicino_core::graph::{self, SetOp, Symmetrize};
use vicino_core::neighbors::Metric;
use vicino_core::repair;

/// The facts of an audit.
#[pyclass(frozen, get_all, module = "vicino._core")]
pub struct HealthOut {
    /// component of each unit, 0 the largest
    labels: Py<PyArray1<i64>>,
    /// component sizes, largest first
    sizes: Vec<usize>,
    /// how many other units name each unit as a neighbour
    in_counts: Py<PyArray1<i64>>,
    self_links: usize,
    one_way: usize,
    /// (largest |w_ij - w_ji|, i, j) with i < j, None when symmetric
    max_asymmetry: Option<(f64, usize, usize)>,
    /// stored weights that are not positive and finite
    bad_weights: usize,
}

/// The facts of an audit.
#[pyfunction]
pub fn health<'py>(py: Python<'py>, w: CsrArgs<'py>) -> PyResult<HealthOut> {
    let w = w.view(py)?;
    let h = run(py, |g| graph::health(w, g))?;
    let in_counts: Vec<i64> = h.in_counts.iter().map(|&c| c as i64).collect();
    Ok(HealthOut {
        labels: h.components.labels.into_pyarray(py).unbind(),
        sizes: h.components.sizes,
        in_counts: in_counts.into_pyarray(py).unbind(),
        self_links: h.self_links,
        one_way: h.one_way,
        max_asymmetry: h.max_asymmetry,
        bad_weights: h.bad_weights,
    })
}

/// Each linked pair once (lower, higher position), self-links left out.
#[pyfunction]
pub fn undirected_pairs<'py>(py: Python<'py>, w: CsrArgs<'py>) -> PyResult<Bound<'py, PyArray2<i64>>> {
    let w = w.view(py)?;
    let pairs = run(py, |_| Ok(graph::undirected_pairs(w)))?;
    let m = pairs.len();
    let flat: Vec<i64> = pairs.into_iter().flat_map(|(a, b)| [a as i64, b as i64]).collect();
    flat.into_pyarray(py).reshape([m, 2])
}

/// Component labels (0 = largest) and sizes, largest first.
#[pyfunction]
pub fn components<'py>(py: Python<'py>, w: CsrArgs<'py>) -> PyResult<(Bound<'py, PyArray1<i64>>, Vec<usize>)> {
    let w = w.view(py)?;
    let c = run(py, |_| Ok(graph::components(w)))?;
    Ok((c.labels.into_pyarray(py), c.sizes))
}

/// Binary k-step neighbours (exactly k, or 1..k when cumulative).
#[pyfunction]
pub fn order<'py>(py: Python<'py>, w: CsrArgs<'py>, k: usize, cumulative: bool) -> PyResult<CsrOut<'py>> {
    let w = w.view(py)?;
    Ok(csr_out(py, run(py, |g| graph::order(w, k, cumulative, g))?))
}

/// Binary union, intersection or difference of the links of a and b.
#[pyfunction]
pub fn combine<'py>(py: Python<'py>, a: CsrArgs<'py>, b: CsrArgs<'py>, op: &str) -> PyResult<CsrOut<'py>> {
    let (a, b) = (a.view(py)?, b.view(py)?);
    Ok(csr_out(py, run(py, |_| graph::combine(a, b, SetOp::parse(op)?))?))
}

/// A symmetric matrix from w and its transpose.
#[pyfunction]
pub fn symmetrize<'py>(py: Python<'py>, w: CsrArgs<'py>, how: &str) -> PyResult<CsrOut<'py>> {
    let w = w.view(py)?;
    Ok(csr_out(py, run(py, |_| graph::symmetrize(w, Symmetrize::parse(how)?))?))
}

type WithSource<'py> = (CsrOut<'py>, Bound<'py, PyArray1<i64>>);

/// The weights among the units at positions `keep`, and the source entry of each entry.
#[pyfunction]
pub fn select<'py>(py: Python<'py>, w: CsrArgs<'py>, keep: PyReadonlyArray1<'py, i64>) -> PyResult<WithSource<'py>> {
    let w = w.view(py)?;
    let keep = slice(&keep)?;
    let (m, src) = run(py, |_| {
        let n = w.n();
        let keep: Vec<usize> = keep
            .iter()
            .map(|&p| {
                usize::try_from(p).map_err(|_| vicino_core::Error::PositionOutOfRange { position: usize::MAX, n })
            })
            .collect::<Result<_, _>>()?;
        graph::select(w, &keep)
    })?;
    Ok((csr_out(py, m), src.into_pyarray(py)))
}

type Repaired<'py> = (CsrOut<'py>, Bound<'py, PyArray1<i64>>, Vec<(usize, usize, f64)>);

/// Add the links a repair found, each weighing `weight`.
fn repaired<'py>(
    py: Python<'py>,
    w: vicino_core::CsrRef<'_>,
    links: Vec<(usize, usize, f64)>,
    weight: f64,
) -> PyResult<Repaired<'py>> {
    let new: Vec<(usize, usize, f64)> = links.iter().map(|&(i, j, _)| (i, j, weight)).collect();
    let (m, src) = run(py, |_| graph::add_links(w, new))?;
    Ok((csr_out(py, m), src.into_pyarray(py), links))
}

/// Links from each island to its k nearest located units (and back when W's links are symmetric).
#[pyfunction]
pub fn connect_islands<'py>(
    py: Python<'py>,
    w: CsrArgs<'py>,
    xy: PyReadonlyArray1<'py, f64>,
    metric: &str,
    k: usize,
    weight: f64,
) -> PyResult<Repaired<'py>> {
    let w = w.view(py)?;
    let xy = slice(&xy)?;
    let links = run(py, |g| repair::island_links(w, xy, Metric::parse(metric)?, k, g))?;
    repaired(py, w, links, weight)
}

/// One link from each smaller component to the largest (and back when W's links are symmetric).
#[pyfunction]
pub fn connect_components<'py>(
    py: Python<'py>,
    w: CsrArgs<'py>,
    xy: PyReadonlyArray1<'py, f64>,
    metric: &str,
    weight: f64,
) -> PyResult<Repaired<'py>> {
    let w = w.view(py)?;
    let xy = slice(&xy)?;
    let links = run(py, |g| repair::component_links(w, xy, Metric::parse(metric)?, g))?;
    repaired(py, w, links, weight)
}
