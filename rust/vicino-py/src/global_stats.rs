//! Global Geary's C, Getis-Ord G and join counts: thin calls into the core.

use crate::convert::{slice, CsrArgs};
use crate::errors::run;
use crate::stats::{summary, PermutationSummary};
use numpy::PyReadonlyArray1;
use pyo3::prelude::*;
use vicino_core::stats::{geary as core_geary, getis, joins, Alternative};

/// A global statistic, its moments and, with permutations, their summary.
/// `normality_*` are NaN where the statistic has no moments under normality.
#[pyclass(frozen, get_all, module = "vicino._core")]
pub struct GlobalOut {
    statistic: f64,
    expected: f64,
    n: usize,
    s0: f64,
    s1: f64,
    s2: f64,
    normality_variance: f64,
    normality_z: f64,
    randomization_variance: f64,
    randomization_z: f64,
    /// when permutations > 0
    permutation: Option<PermutationSummary>,
}

/// Global Geary's C.
#[pyfunction]
pub fn geary<'py>(
    py: Python<'py>,
    w: CsrArgs<'py>,
    x: PyReadonlyArray1<'py, f64>,
    permutations: usize,
    seed: u64,
    alternative: &str,
) -> PyResult<GlobalOut> {
    let w = w.view(py)?;
    let x = slice(&x)?;
    let c = run(py, |g| core_geary::geary(w, x, permutations, seed, Alternative::parse(alternative)?, g))?;
    Ok(GlobalOut {
        statistic: c.statistic,
        expected: c.expected,
        n: c.n,
        s0: c.sums.s0,
        s1: c.sums.s1,
        s2: c.sums.s2,
        normality_variance: c.normality.variance,
        normality_z: c.normality.z,
        randomization_variance: c.randomization.variance,
        randomization_z: c.randomization.z,
        permutation: summary(py, c.permutation),
    })
}

/// Global Getis-Ord G.
#[pyfunction]
pub fn getis_ord<'py>(
    py: Python<'py>,
    w: CsrArgs<'py>,
    x: PyReadonlyArray1<'py, f64>,
    permutations: usize,
    seed: u64,
    alternative: &str,
) -> PyResult<GlobalOut> {
    let w = w.view(py)?;
    let x = slice(&x)?;
    let g = run(py, |g| getis::getis_ord(w, x, permutations, seed, Alternative::parse(alternative)?, g))?;
    Ok(GlobalOut {
        statistic: g.statistic,
        expected: g.expected,
        n: g.n,
        s0: g.sums.s0,
        s1: g.sums.s1,
        s2: g.sums.s2,
        normality_variance: f64::NAN,
        normality_z: f64::NAN,
        randomization_variance: g.randomization.variance,
        randomization_z: g.randomization.z,
        permutation: summary(py, g.permutation),
    })
}

/// (count, (free expected, variance, z), (non-free expected, variance, z), permutation) of one join count.
type JoinOut = (f64, (f64, f64, f64), (f64, f64, f64), Option<PermutationSummary>);

/// ((s0, s1, s2), units coded 1, [both 1, both 0, unlike]).
type JoinCountsOut = ((f64, f64, f64), usize, Vec<JoinOut>);

/// Join counts of 0 / 1 values.
#[pyfunction]
pub fn join_counts<'py>(
    py: Python<'py>,
    w: CsrArgs<'py>,
    x: PyReadonlyArray1<'py, f64>,
    permutations: usize,
    seed: u64,
    alternative: &str,
) -> PyResult<JoinCountsOut> {
    let w = w.view(py)?;
    let x = slice(&x)?;
    let j = run(py, |g| joins::join_counts(w, x, permutations, seed, Alternative::parse(alternative)?, g))?;
    let out = |c: joins::JoinCount| -> JoinOut {
        let m = |m: joins::Moments| (m.expected, m.variance, m.z);
        (c.count, m(c.free), m(c.nonfree), summary(py, c.permutation))
    };
    Ok(((j.sums.s0, j.sums.s1, j.sums.s2), j.ones, vec![out(j.ones_ones), out(j.zeros_zeros), out(j.unlike)]))
}

/// Add the classes and functions of this file to the module.
pub fn register(m: &Bound<'_, PyModule>) -> PyResult<()> {
    m.add_class::<GlobalOut>()?;
    m.add_function(wrap_pyfunction!(geary, m)?)?;
    m.add_function(wrap_pyfunction!(getis_ord, m)?)?;
    m.add_function(wrap_pyfunction!(join_counts, m)?)?;
    Ok(())
}
