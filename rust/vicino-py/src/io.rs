//! Weights files: Matrix Market and triplet text, read and written by the core.

use crate::convert::{csr_out, CsrArgs, CsrOut};
use crate::errors::run;
use numpy::{IntoPyArray, PyArray1, PyReadonlyArray1};
use pyo3::prelude::*;
use vicino_core::io::{ids as io_ids, matrix_market, triplet, WeightsFile};

/// (n, (indptr, indices, data), record or None, stored as symmetric, pattern)
type FileOut<'py> = (usize, CsrOut<'py>, Option<String>, bool, bool);

fn file_out(py: Python<'_>, f: WeightsFile) -> FileOut<'_> {
    (f.graph.n(), csr_out(py, f.graph), f.record, f.symmetric, f.pattern)
}

/// Read a Matrix Market file.
#[pyfunction]
pub fn read_matrix_market(py: Python<'_>, path: String) -> PyResult<FileOut<'_>> {
    let f = run(py, |g| matrix_market::read(&path, g))?;
    Ok(file_out(py, f))
}

/// Write a Matrix Market file; whether it was stored as symmetric.
#[pyfunction]
pub fn write_matrix_market<'py>(py: Python<'py>, path: String, w: CsrArgs<'py>, record: String) -> PyResult<bool> {
    let w = w.view(py)?;
    run(py, |g| matrix_market::write(&path, w, &record, g))
}

/// Read a triplet file.
#[pyfunction]
pub fn read_triplet(py: Python<'_>, path: String) -> PyResult<FileOut<'_>> {
    let f = run(py, |g| triplet::read(&path, g))?;
    Ok(file_out(py, f))
}

/// Write a triplet file with the closing `n n 0` line.
#[pyfunction]
pub fn write_triplet<'py>(py: Python<'py>, path: String, w: CsrArgs<'py>, record: String) -> PyResult<()> {
    let w = w.view(py)?;
    run(py, |g| triplet::write(&path, w, &record, g))
}

/// (whole-number ids, or None and the header of a file of text ids)
type IdsOut<'py> = (Option<Bound<'py, PyArray1<i64>>>, Option<String>);

/// Write whole-number ids, one per line after the `id:int64` header.
#[pyfunction]
pub fn write_int_ids(py: Python<'_>, path: String, ids: PyReadonlyArray1<'_, i64>) -> PyResult<()> {
    let ids = ids.as_slice()?;
    run(py, |g| io_ids::write_int(&path, ids, g))
}

/// Read an ids file: (whole-number ids, None) when its header is
/// `id:int64`, else (None, the header).
#[pyfunction]
pub fn read_int_ids(py: Python<'_>, path: String) -> PyResult<IdsOut<'_>> {
    match run(py, |g| io_ids::read(&path, g))? {
        io_ids::IdsFile::Ints(v) => Ok((Some(v.into_pyarray(py)), None)),
        io_ids::IdsFile::Other(h) => Ok((None, Some(h))),
    }
}
