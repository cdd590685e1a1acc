//! Contiguity and Cliff-Ord weights of polygons given as Well-Known Binary
//! (decoded into flat buffers in the core, without the GIL).

use crate::convert::{csr_out, slice, CsrOut};
use crate::errors::run;
use numpy::{IntoPyArray, PyArray1, PyReadonlyArray1};
use pyo3::prelude::*;
use vicino_core::contiguity::{self as core, Rule};
use vicino_core::io::wkb::decode_polygons;
use vicino_core::neighbors::Metric;

/// Units as Well-Known Binary: all bytes in one array, and the offsets of
/// each unit's bytes.
type Wkb<'py> = (PyReadonlyArray1<'py, u8>, PyReadonlyArray1<'py, i64>);

type ContiguityOut<'py> = (CsrOut<'py>, Bound<'py, PyArray1<f64>>, Vec<usize>);

/// Contiguity: ((indptr, indices, shared lengths), perimeters, empty units).
#[pyfunction]
pub fn contiguity<'py>(
    py: Python<'py>,
    polygons: Wkb<'py>,
    rule: &str,
    tolerance: f64,
    metric: &str,
) -> PyResult<ContiguityOut<'py>> {
    let (bytes, offsets) = (slice(&polygons.0)?, slice(&polygons.1)?);
    let out = run(py, || {
        let b = decode_polygons(bytes, offsets)?;
        core::contiguity(&b.polygons()?, Rule::parse(rule)?, tolerance, Metric::parse(metric)?)
    })?;
    Ok((csr_out(py, out.graph), out.perimeter.into_pyarray(py), out.empty))
}

/// Cliff-Ord weights: ((indptr, indices, weights), perimeters, empty units).
#[pyfunction]
pub fn cliff_ord<'py>(
    py: Python<'py>,
    polygons: Wkb<'py>,
    border_power: f64,
    distance_power: f64,
    tolerance: f64,
    metric: &str,
) -> PyResult<ContiguityOut<'py>> {
    let (bytes, offsets) = (slice(&polygons.0)?, slice(&polygons.1)?);
    let (w, info) = run(py, || {
        let b = decode_polygons(bytes, offsets)?;
        core::cliff_ord(&b.polygons()?, border_power, distance_power, tolerance, Metric::parse(metric)?)
    })?;
    Ok((csr_out(py, w), info.perimeter.into_pyarray(py), info.empty))
}
