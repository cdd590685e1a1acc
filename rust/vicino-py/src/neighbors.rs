//! Neighbour search on points.

use crate::convert::{csr_out, slice, CsrOut};
use crate::errors::run;
use numpy::PyReadonlyArray1;
use pyo3::prelude::*;
use vicino_core::neighbors::{self, Metric};

/// k nearest neighbours of interleaved coordinates: ((indptr, indices,
/// distances), duplicate_units).
#[pyfunction]
pub fn k_nearest<'py>(
    py: Python<'py>,
    xy: PyReadonlyArray1<'py, f64>,
    k: usize,
    metric: &str,
) -> PyResult<(CsrOut<'py>, usize)> {
    let xy = slice(&xy)?;
    let nb = run(py, |g| neighbors::k_nearest(xy, k, Metric::parse(metric)?, g))?;
    Ok((csr_out(py, nb.graph), nb.duplicate_units))
}

/// All neighbours within a distance (inclusive).
#[pyfunction]
pub fn within_distance<'py>(
    py: Python<'py>,
    xy: PyReadonlyArray1<'py, f64>,
    radius: f64,
    metric: &str,
) -> PyResult<(CsrOut<'py>, usize)> {
    let xy = slice(&xy)?;
    let nb = run(py, |g| neighbors::within_distance(xy, radius, Metric::parse(metric)?, g))?;
    Ok((csr_out(py, nb.graph), nb.duplicate_units))
}
