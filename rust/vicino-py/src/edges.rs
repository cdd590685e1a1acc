//! Weights from edge lists.

use crate::convert::{csr_out, slice, CsrOut};
use crate::errors::run;
use numpy::{IntoPyArray, PyArray1, PyReadonlyArray1};
use pyo3::prelude::*;
use vicino_core::edges::{self, Duplicates, SelfLoops};

/// ((indptr, indices, data), first edge of each entry, self-loops dropped, duplicates merged)
type EdgesOut<'py> = (CsrOut<'py>, Bound<'py, PyArray1<i64>>, usize, usize);

/// Weights of n units from edges source -> target weighing weight (positions).
#[pyfunction]
pub fn from_edges<'py>(
    py: Python<'py>,
    n: usize,
    source: PyReadonlyArray1<'py, i64>,
    target: PyReadonlyArray1<'py, i64>,
    weight: PyReadonlyArray1<'py, f64>,
    duplicates: &str,
    self_loops: &str,
) -> PyResult<EdgesOut<'py>> {
    let (s, t, w) = (slice(&source)?, slice(&target)?, slice(&weight)?);
    let out =
        run(py, |g| edges::from_edges(n, s, t, w, Duplicates::parse(duplicates)?, SelfLoops::parse(self_loops)?, g))?;
    Ok((csr_out(py, out.graph), out.first_edge.into_pyarray(py), out.dropped_self_loops, out.merged_duplicates))
}
