//! Audit facts, algebra and repairs of a weights matrix.

use crate::contiguity::{with_polygon_input, PolygonInput};
use crate::convert::{csr_out, slice, CsrArgs, CsrOut};
use crate::errors::run;
use numpy::{IntoPyArray, PyArray1, PyReadonlyArray1};
use pyo3::prelude::*;
use pyo3::types::PyDict;
use vicino_core::graph::{self, SetOp, Symmetrize};
use vicino_core::neighbors::Metric;
use vicino_core::repair;

/// The facts of an audit as a dict.
#[pyfunction]
pub fn health<'py>(py: Python<'py>, w: CsrArgs<'py>) -> PyResult<Bound<'py, PyDict>> {
    let w = w.view(py)?;
    let h = run(py, || Ok(graph::health(w)))?;
    let d = PyDict::new(py);
    d.set_item("labels", h.components.labels.into_pyarray(py))?;
    d.set_item("sizes", h.components.sizes)?;
    d.set_item("in_counts", h.in_counts.into_pyarray(py))?;
    d.set_item("self_links", h.self_links)?;
    d.set_item("one_way", h.one_way)?;
    d.set_item("max_asymmetry", h.max_asymmetry)?;
    Ok(d)
}

/// Component labels (0 = largest) and sizes, largest first.
#[pyfunction]
pub fn components<'py>(py: Python<'py>, w: CsrArgs<'py>) -> PyResult<(Bound<'py, PyArray1<i64>>, Vec<usize>)> {
    let w = w.view(py)?;
    let c = run(py, || Ok(graph::components(w)))?;
    Ok((c.labels.into_pyarray(py), c.sizes))
}

/// Binary k-step neighbours (exactly k, or 1..k when cumulative).
#[pyfunction]
pub fn order<'py>(py: Python<'py>, w: CsrArgs<'py>, k: usize, cumulative: bool) -> PyResult<CsrOut<'py>> {
    let w = w.view(py)?;
    Ok(csr_out(py, run(py, || graph::order(w, k, cumulative))?))
}

/// Binary union, intersection or difference of the links of a and b.
#[pyfunction]
pub fn combine<'py>(py: Python<'py>, a: CsrArgs<'py>, b: CsrArgs<'py>, op: &str) -> PyResult<CsrOut<'py>> {
    let (a, b) = (a.view(py)?, b.view(py)?);
    Ok(csr_out(py, run(py, || graph::combine(a, b, SetOp::parse(op)?))?))
}

/// A symmetric matrix from w and its transpose.
#[pyfunction]
pub fn symmetrize<'py>(py: Python<'py>, w: CsrArgs<'py>, how: &str) -> PyResult<CsrOut<'py>> {
    let w = w.view(py)?;
    Ok(csr_out(py, run(py, || Ok(graph::symmetrize(w, Symmetrize::parse(how)?)))?))
}

type WithSource<'py> = (CsrOut<'py>, Bound<'py, PyArray1<i64>>);

/// The weights among the units at positions `keep`, and the source entry of each entry.
#[pyfunction]
pub fn select<'py>(py: Python<'py>, w: CsrArgs<'py>, keep: PyReadonlyArray1<'py, i64>) -> PyResult<WithSource<'py>> {
    let w = w.view(py)?;
    let keep = slice(&keep)?;
    let (m, src) = run(py, || {
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
    let (m, src) = run(py, || graph::add_links(w, new))?;
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
    let links = run(py, || repair::island_links(w, xy, Metric::parse(metric)?, k))?;
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
    let links = run(py, || repair::component_links(w, xy, Metric::parse(metric)?))?;
    repaired(py, w, links, weight)
}

/// Centroids of polygons as interleaved x, y (NaN for empty units).
#[pyfunction]
pub fn centroids<'py>(py: Python<'py>, polygons: PolygonInput<'py>) -> PyResult<Bound<'py, PyArray1<f64>>> {
    let out = with_polygon_input(py, polygons, |p| Ok(vicino_core::contiguity::centroids(p)))?;
    Ok(out.into_pyarray(py))
}
