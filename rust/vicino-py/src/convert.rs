//! Conversions between NumPy buffers and core types. Inputs are borrowed
//! (Python has already made them contiguous float64 / int64); outputs are
//! owned buffers handed to NumPy without a copy.

use crate::errors::to_py;
use numpy::{IntoPyArray, PyArray1, PyReadonlyArray1};
use pyo3::prelude::*;
use vicino_core::{Csr, CsrRef};

/// A weights matrix as Python passes it: one tuple (n, indptr, indices,
/// data), the buffers of a `vicino.Weights`.
#[derive(FromPyObject)]
pub struct CsrArgs<'py>(
    pub usize,
    pub PyReadonlyArray1<'py, i64>,
    pub PyReadonlyArray1<'py, i64>,
    pub PyReadonlyArray1<'py, f64>,
);

impl<'py> CsrArgs<'py> {
    /// Borrow as a trusted core matrix (buffers held by a `vicino.Weights`).
    pub fn view(&self, py: Python<'py>) -> PyResult<CsrRef<'_>> {
        CsrRef::trusted(self.0, slice(&self.1)?, slice(&self.2)?, slice(&self.3)?).map_err(|e| to_py(py, e))
    }
}

/// A contiguous slice of a read-only array.
pub fn slice<'a, T: numpy::Element>(a: &'a PyReadonlyArray1<'_, T>) -> PyResult<&'a [T]> {
    a.as_slice().map_err(|e| pyo3::exceptions::PyValueError::new_err(e.to_string()))
}

pub type CsrOut<'py> = (Bound<'py, PyArray1<i64>>, Bound<'py, PyArray1<i64>>, Bound<'py, PyArray1<f64>>);

/// Hand a core matrix to NumPy as (indptr, indices, data).
pub fn csr_out(py: Python<'_>, m: Csr) -> CsrOut<'_> {
    let (indptr, indices, data) = m.into_parts();
    (indptr.into_pyarray(py), indices.into_pyarray(py), data.into_pyarray(py))
}
