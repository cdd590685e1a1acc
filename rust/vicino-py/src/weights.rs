//! Validation, standardization, spectral radius and lags of a weights matrix.

use crate::convert::{slice, CsrArgs};
use crate::errors::run;
use numpy::{IntoPyArray, PyArray1, PyArray2, PyReadonlyArray1, PyReadonlyArray2};
use pyo3::prelude::*;
use vicino_core::standardize::{self as scale, Islands, Method};
use vicino_core::{lag, spectral, CsrRef};

/// Full check of CSR buffers: canonical structure, finite, non-negative.
#[pyfunction]
pub fn validate<'py>(
    py: Python<'py>,
    n: usize,
    indptr: PyReadonlyArray1<'py, i64>,
    indices: PyReadonlyArray1<'py, i64>,
    data: PyReadonlyArray1<'py, f64>,
) -> PyResult<()> {
    let (p, i, d) = (slice(&indptr)?, slice(&indices)?, slice(&data)?);
    run(py, || CsrRef::validated(n, p, i, d).map(|_| ()))
}

/// New data after standardization (the structure is unchanged).
#[pyfunction]
pub fn standardize<'py>(
    py: Python<'py>,
    w: CsrArgs<'py>,
    method: &str,
    keep_islands: bool,
) -> PyResult<Bound<'py, PyArray1<f64>>> {
    let w = w.view(py)?;
    let islands = if keep_islands { Islands::Keep } else { Islands::Raise };
    let out = run(py, || scale::standardize(w, Method::parse(method)?, islands))?;
    Ok(out.into_pyarray(py))
}

/// Spectral radius: (value, iterations, method name).
#[pyfunction]
pub fn spectral_radius<'py>(py: Python<'py>, w: CsrArgs<'py>) -> PyResult<(f64, usize, &'static str)> {
    let w = w.view(py)?;
    let r = run(py, || spectral::spectral_radius(w))?;
    let name = match r.method {
        spectral::SpectralMethod::ConstantSums => "constant sums",
        spectral::SpectralMethod::Lanczos => "Lanczos",
        spectral::SpectralMethod::ShiftedPower => "shifted power iteration",
    };
    Ok((r.value, r.iterations, name))
}

/// W x for a vector.
#[pyfunction]
pub fn lag_vector<'py>(
    py: Python<'py>,
    w: CsrArgs<'py>,
    x: PyReadonlyArray1<'py, f64>,
) -> PyResult<Bound<'py, PyArray1<f64>>> {
    let w = w.view(py)?;
    let x = slice(&x)?;
    Ok(run(py, || lag::lag(w, x))?.into_pyarray(py))
}

/// W X for an (n, m) array.
#[pyfunction]
pub fn lag_columns<'py>(
    py: Python<'py>,
    w: CsrArgs<'py>,
    x: PyReadonlyArray2<'py, f64>,
) -> PyResult<Bound<'py, PyArray2<f64>>> {
    let w = w.view(py)?;
    let x = x.as_array();
    Ok(run(py, || lag::lag_columns(w, x))?.into_pyarray(py))
}
