//! Local statistics: local Moran's I, local G_i / G_i*, p-value adjustments.

use crate::convert::{slice, CsrArgs};
use crate::errors::run;
use numpy::{IntoPyArray, PyArray1, PyReadonlyArray1};
use pyo3::prelude::*;
use vicino_core::stats::local::{self, Adjustment, LocalPermutation};
use vicino_core::stats::Alternative;

type F = Py<PyArray1<f64>>;
/// (extreme counts, p-values, mean, std, z) of the conditional permutation tests.
type LocalPermutationOut = (Py<PyArray1<u32>>, F, F, F, F);

fn floats(py: Python<'_>, v: Vec<f64>) -> F {
    v.into_pyarray(py).unbind()
}

fn permutation_out(py: Python<'_>, p: Option<LocalPermutation>) -> Option<LocalPermutationOut> {
    p.map(|p| {
        (
            p.extreme.into_pyarray(py).unbind(),
            floats(py, p.p_value),
            floats(py, p.mean),
            floats(py, p.std),
            floats(py, p.z),
        )
    })
}

/// Local Moran's I of every unit.
#[pyclass(frozen, get_all, module = "vicino._core")]
pub struct LocalMoranOut {
    statistic: F,
    expected: F,
    variance: F,
    z: F,
    standardized: F,
    lag: F,
    quadrant: Py<PyArray1<i8>>,
    islands: Vec<usize>,
    kurtosis: f64,
    permutation: Option<LocalPermutationOut>,
}

/// Local Getis-Ord G_i or G_i* of every unit.
#[pyclass(frozen, get_all, module = "vicino._core")]
pub struct LocalGetisOrdOut {
    statistic: F,
    expected: F,
    z: F,
    islands: Vec<usize>,
    permutation: Option<LocalPermutationOut>,
}

/// Local Moran's I with a conditional permutation test.
#[pyfunction]
pub fn local_moran<'py>(
    py: Python<'py>,
    w: CsrArgs<'py>,
    x: PyReadonlyArray1<'py, f64>,
    permutations: usize,
    seed: u64,
    alternative: &str,
) -> PyResult<LocalMoranOut> {
    let w = w.view(py)?;
    let x = slice(&x)?;
    let m = run(py, |g| local::local_moran(w, x, permutations, seed, Alternative::parse(alternative)?, g))?;
    Ok(LocalMoranOut {
        statistic: floats(py, m.statistic),
        expected: floats(py, m.expected),
        variance: floats(py, m.variance),
        z: floats(py, m.z),
        standardized: floats(py, m.standardized),
        lag: floats(py, m.lag),
        quadrant: m.quadrant.into_pyarray(py).unbind(),
        islands: m.islands,
        kurtosis: m.kurtosis,
        permutation: permutation_out(py, m.permutation),
    })
}

/// Local G_i (or G_i* when `star`) with a conditional permutation test.
#[pyfunction]
pub fn local_getis_ord<'py>(
    py: Python<'py>,
    w: CsrArgs<'py>,
    x: PyReadonlyArray1<'py, f64>,
    star: bool,
    permutations: usize,
    seed: u64,
    alternative: &str,
) -> PyResult<LocalGetisOrdOut> {
    let w = w.view(py)?;
    let x = slice(&x)?;
    let g = run(py, |g| local::local_getis_ord(w, x, star, permutations, seed, Alternative::parse(alternative)?, g))?;
    Ok(LocalGetisOrdOut {
        statistic: floats(py, g.statistic),
        expected: floats(py, g.expected),
        z: floats(py, g.z),
        islands: g.islands,
        permutation: permutation_out(py, g.permutation),
    })
}

/// P-values adjusted for multiple tests ("none", "fdr", "bonferroni"); NaN stays NaN.
#[pyfunction]
pub fn adjust_p_values<'py>(
    py: Python<'py>,
    p: PyReadonlyArray1<'py, f64>,
    method: &str,
) -> PyResult<Bound<'py, PyArray1<f64>>> {
    let p = slice(&p)?;
    let out = run(py, |_| Ok(local::adjust(p, Adjustment::parse(method)?)))?;
    Ok(out.into_pyarray(py))
}

/// Register the classes and functions of this file.
pub fn register(m: &Bound<'_, PyModule>) -> PyResult<()> {
    m.add_class::<LocalMoranOut>()?;
    m.add_class::<LocalGetisOrdOut>()?;
    m.add_function(wrap_pyfunction!(local_moran, m)?)?;
    m.add_function(wrap_pyfunction!(local_getis_ord, m)?)?;
    m.add_function(wrap_pyfunction!(adjust_p_values, m)?)?;
    Ok(())
}
