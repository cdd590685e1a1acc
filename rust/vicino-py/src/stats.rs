//! Global statistics.

use crate::convert::{slice, CsrArgs};
use crate::errors::run;
use numpy::{IntoPyArray, PyReadonlyArray1};
use pyo3::prelude::*;
use pyo3::types::PyDict;
use vicino_core::stats::{global, Alternative};

/// Global Moran's I: a dict of the statistic, its moments and, when
/// `permutations > 0`, the permutation summary and draws.
#[pyfunction]
pub fn moran<'py>(
    py: Python<'py>,
    w: CsrArgs<'py>,
    x: PyReadonlyArray1<'py, f64>,
    permutations: usize,
    seed: u64,
    alternative: &str,
) -> PyResult<Bound<'py, PyDict>> {
    let w = w.view(py)?;
    let x = slice(&x)?;
    let m = run(py, || global::moran(w, x, permutations, seed, Alternative::parse(alternative)?))?;
    let d = PyDict::new(py);
    d.set_item("statistic", m.statistic)?;
    d.set_item("expected", m.expected)?;
    d.set_item("n", m.n)?;
    d.set_item("s0", m.sums.s0)?;
    d.set_item("s1", m.sums.s1)?;
    d.set_item("s2", m.sums.s2)?;
    d.set_item("kurtosis", m.kurtosis)?;
    d.set_item("normality_variance", m.normality.variance)?;
    d.set_item("normality_z", m.normality.z)?;
    d.set_item("randomization_variance", m.randomization.variance)?;
    d.set_item("randomization_z", m.randomization.z)?;
    if let Some(p) = m.permutation {
        d.set_item("perm_extreme", p.extreme)?;
        d.set_item("perm_p", p.p_value)?;
        d.set_item("perm_mean", p.mean)?;
        d.set_item("perm_std", p.std)?;
        d.set_item("perm_z", p.z)?;
        d.set_item("perm_draws", p.draws.into_pyarray(py))?;
    }
    Ok(d)
}
