//! Validation, standardization, spectral radius, counts and lags of a weights matrix.

use crate::convert::{slice, CsrArgs};
use crate::errors::run;
use numpy::{
    IntoPyArray, PyArray1, PyArray2, PyArrayMethods, PyReadonlyArray1, PyReadonlyArray2, PyUntypedArrayMethods,
};
use pyo3::prelude::*;
use vicino_core::standardize::{self as scale, Islands, Method};
use vicino_core::{lag, spectral, CsrRef};

/// Full check of CSR buffers: canonical structure, weights finite and positive.
#[pyfunction]
pub fn validate<'py>(
    py: Python<'py>,
    n: usize,
    indptr: PyReadonlyArray1<'py, i64>,
    indices: PyReadonlyArray1<'py, i64>,
    data: PyReadonlyArray1<'py, f64>,
) -> PyResult<()> {
    let (p, i, d) = (slice(&indptr)?, slice(&indices)?, slice(&data)?);
    run(py, |_| CsrRef::validated(n, p, i, d).map(|_| ()))
}

/// Links of each unit to other units (self-links are not neighbours).
#[pyfunction]
pub fn neighbour_counts<'py>(py: Python<'py>, w: CsrArgs<'py>) -> PyResult<Bound<'py, PyArray1<i64>>> {
    let w = w.view(py)?;
    let counts = run(py, |_| Ok(w.neighbour_counts().into_iter().map(|c| c as i64).collect::<Vec<i64>>()))?;
    Ok(counts.into_pyarray(py))
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
    let out = run(py, |g| scale::standardize(w, Method::parse(method)?, islands, g))?;
    Ok(out.into_pyarray(py))
}

fn method_name(m: spectral::SpectralMethod) -> &'static str {
    use spectral::SpectralMethod::*;
    match m {
        ConstantSums => "constant sums",
        Lanczos => "Lanczos",
        ShiftedPower => "shifted power iteration",
        Dense => "dense QR",
        Cycle => "directed cycle (closed form)",
        ThickLanczos => "thick-restart Lanczos",
        Arnoldi => "implicitly restarted Arnoldi",
        Blocks => "strongly connected blocks",
        Bipartite => "bipartite links (spectrum symmetric about 0)",
    }
}

/// Spectral radius: (value, iterations, method name, error bound).
#[pyfunction]
pub fn spectral_radius<'py>(py: Python<'py>, w: CsrArgs<'py>) -> PyResult<(f64, usize, &'static str, f64)> {
    let w = w.view(py)?;
    let r = run(py, |g| spectral::spectral_radius(w, g))?;
    Ok((r.value, r.iterations, method_name(r.method), r.error))
}

/// Smallest and largest real eigenvalues: ((min, error, method), (max, error, method), products).
#[pyfunction]
#[allow(clippy::type_complexity)]
pub fn eigenvalue_bounds<'py>(
    py: Python<'py>,
    w: CsrArgs<'py>,
    tol: f64,
) -> PyResult<((f64, f64, &'static str), (f64, f64, &'static str), usize)> {
    let w = w.view(py)?;
    let b = run(py, |g| spectral::eigenvalue_bounds(w, tol, g))?;
    Ok(((b.min, b.min_error, method_name(b.min_method)), (b.max, b.max_error, method_name(b.max_method)), b.products))
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
    Ok(run(py, |_| lag::lag(w, x, 1))?.into_pyarray(py))
}

/// W X for an (n, m) C-contiguous array.
#[pyfunction]
pub fn lag_columns<'py>(
    py: Python<'py>,
    w: CsrArgs<'py>,
    x: PyReadonlyArray2<'py, f64>,
) -> PyResult<Bound<'py, PyArray2<f64>>> {
    let w = w.view(py)?;
    let (rows, m) = (x.shape()[0], x.shape()[1]);
    let flat = x.as_slice().map_err(|e| pyo3::exceptions::PyValueError::new_err(e.to_string()))?;
    let out = run(py, |_| lag::lag(w, flat, m))?;
    out.into_pyarray(py).reshape([rows, m])
}

/// A weights matrix packed for repeated lags (see `vicino_core::lag::Packed`),
/// kept by a `vicino.Weights` once it has been lagged more than once.
#[pyclass(frozen, module = "vicino._core")]
pub struct Packed(lag::Packed);

#[pymethods]
impl Packed {
    /// Bytes held by the packed matrix.
    #[getter]
    fn nbytes(&self) -> usize {
        self.0.bytes()
    }
}

/// The packed form of a matrix; None when it does not fit 32-bit positions.
#[pyfunction]
pub fn pack<'py>(py: Python<'py>, w: CsrArgs<'py>) -> PyResult<Option<Packed>> {
    let w = w.view(py)?;
    Ok(run(py, |_| Ok(lag::Packed::new(w)))?.map(Packed))
}

/// W x for a vector, with a packed matrix.
#[pyfunction]
pub fn lag_packed_vector<'py>(
    py: Python<'py>,
    w: &Packed,
    x: PyReadonlyArray1<'py, f64>,
) -> PyResult<Bound<'py, PyArray1<f64>>> {
    let x = slice(&x)?;
    Ok(run(py, |_| w.0.lag(x, 1))?.into_pyarray(py))
}

/// W X for an (n, m) C-contiguous array, with a packed matrix.
#[pyfunction]
pub fn lag_packed_columns<'py>(
    py: Python<'py>,
    w: &Packed,
    x: PyReadonlyArray2<'py, f64>,
) -> PyResult<Bound<'py, PyArray2<f64>>> {
    let (rows, m) = (x.shape()[0], x.shape()[1]);
    let flat = x.as_slice().map_err(|e| pyo3::exceptions::PyValueError::new_err(e.to_string()))?;
    let out = run(py, |_| w.0.lag(flat, m))?;
    out.into_pyarray(py).reshape([rows, m])
}
