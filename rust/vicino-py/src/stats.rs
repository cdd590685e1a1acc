//! Global statistics.

use crate::convert::{slice, CsrArgs};
use crate::errors::run;
use numpy::{IntoPyArray, PyArray1, PyReadonlyArray1};
use pyo3::prelude::*;
use vicino_core::stats::{global, Alternative};

/// (extreme count, p-value, mean, std, z, draws) of a permutation test.
pub type PermutationSummary = (usize, f64, f64, f64, f64, Py<PyArray1<f64>>);

/// A permutation test's summary for Python (the draws as a NumPy array, no copy).
pub fn summary(py: Python<'_>, p: Option<global::Permutation>) -> Option<PermutationSummary> {
    p.map(|p| (p.extreme, p.p_value, p.mean, p.std, p.z, p.draws.into_pyarray(py).unbind()))
}

/// Global Moran's I, its moments and, with permutations, their summary.
#[pyclass(frozen, get_all, module = "vicino._core")]
pub struct MoranOut {
    statistic: f64,
    expected: f64,
    n: usize,
    s0: f64,
    s1: f64,
    s2: f64,
    kurtosis: f64,
    normality_variance: f64,
    normality_z: f64,
    randomization_variance: f64,
    randomization_z: f64,
    /// when permutations > 0
    permutation: Option<PermutationSummary>,
}

/// Global Moran's I.
#[pyfunction]
pub fn moran<'py>(
    py: Python<'py>,
    w: CsrArgs<'py>,
    x: PyReadonlyArray1<'py, f64>,
    permutations: usize,
    seed: u64,
    alternative: &str,
) -> PyResult<MoranOut> {
    let w = w.view(py)?;
    let x = slice(&x)?;
    let m = run(py, |g| global::moran(w, x, permutations, seed, Alternative::parse(alternative)?, g))?;
    Ok(MoranOut {
        statistic: m.statistic,
        expected: m.expected,
        n: m.n,
        s0: m.sums.s0,
        s1: m.sums.s1,
        s2: m.sums.s2,
        kurtosis: m.kurtosis,
        normality_variance: m.normality.variance,
        normality_z: m.normality.z,
        randomization_variance: m.randomization.variance,
        randomization_z: m.randomization.z,
        permutation: summary(py, m.permutation),
    })
}
