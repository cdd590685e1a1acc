//! Contiguity and Cliff-Ord weights of polygons given as flat buffers.

use crate::convert::{csr_out, slice, CsrOut};
use crate::errors::run;
use numpy::{IntoPyArray, PyArray1, PyReadonlyArray1};
use pyo3::prelude::*;
use vicino_core::contiguity::{self as core, Polygons, Rule};
use vicino_core::neighbors::Metric;

/// The ragged buffers of shapely.to_ragged_array for multipolygons.
type Ragged<'py> = (
    PyReadonlyArray1<'py, f64>,
    PyReadonlyArray1<'py, i64>,
    PyReadonlyArray1<'py, i64>,
    PyReadonlyArray1<'py, i64>,
);

type ContiguityOut<'py> = (CsrOut<'py>, Bound<'py, PyArray1<f64>>, Vec<usize>);

/// Contiguity: ((indptr, indices, shared lengths), perimeters, empty units).
#[pyfunction]
pub fn contiguity<'py>(
    py: Python<'py>,
    polygons: Ragged<'py>,
    rule: &str,
    tolerance: f64,
    metric: &str,
) -> PyResult<ContiguityOut<'py>> {
    let (c, r, p, u) = (slice(&polygons.0)?, slice(&polygons.1)?, slice(&polygons.2)?, slice(&polygons.3)?);
    let out = run(py, || {
        let polys = Polygons::new(c, r, p, u)?;
        core::contiguity(&polys, Rule::parse(rule)?, tolerance, Metric::parse(metric)?)
    })?;
    Ok((csr_out(py, out.graph), out.perimeter.into_pyarray(py), out.empty))
}

/// Cliff-Ord weights: ((indptr, indices, weights), perimeters, empty units).
#[pyfunction]
pub fn cliff_ord<'py>(
    py: Python<'py>,
    polygons: Ragged<'py>,
    border_power: f64,
    distance_power: f64,
    tolerance: f64,
    metric: &str,
) -> PyResult<ContiguityOut<'py>> {
    let (c, r, p, u) = (slice(&polygons.0)?, slice(&polygons.1)?, slice(&polygons.2)?, slice(&polygons.3)?);
    let (w, info) = run(py, || {
        let polys = Polygons::new(c, r, p, u)?;
        core::cliff_ord(&polys, border_power, distance_power, tolerance, Metric::parse(metric)?)
    })?;
    Ok((csr_out(py, w), info.perimeter.into_pyarray(py), info.empty))
}
