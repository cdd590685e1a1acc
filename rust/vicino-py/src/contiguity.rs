//! Contiguity and Cliff-Ord weights of polygons, read without the GIL from
//! either Well-Known Binary or, for units of one ring each, flat coordinates.

use crate::convert::{csr_out, slice, CsrOut};
use crate::errors::run;
use numpy::{IntoPyArray, PyArray1, PyReadonlyArray1};
use pyo3::prelude::*;
use vicino_core::contiguity::{self as core, Polygons, Rule};
use vicino_core::error::Result;
use vicino_core::io::wkb::decode_polygons;
use vicino_core::neighbors::Metric;
use vicino_core::Guard;

/// How Python hands over the units.
#[derive(FromPyObject)]
pub enum PolygonInput<'py> {
    /// ("wkb", all bytes, offsets of each unit's bytes)
    Wkb(String, PyReadonlyArray1<'py, u8>, PyReadonlyArray1<'py, i64>),
    /// ("rings", interleaved x y, offsets of each unit's one ring): units
    /// that are single polygons without holes (an empty ring is an empty unit)
    Rings(String, PyReadonlyArray1<'py, f64>, PyReadonlyArray1<'py, i64>),
}

enum Raw<'a> {
    Wkb(&'a [u8], &'a [i64]),
    Rings(&'a [f64], &'a [i64]),
}

impl<'py> PolygonInput<'py> {
    fn raw(&self) -> PyResult<Raw<'_>> {
        let bad = |tag: &str| pyo3::exceptions::PyValueError::new_err(format!("unknown polygon buffer kind {tag:?}"));
        match self {
            PolygonInput::Wkb(tag, b, o) if tag == "wkb" => Ok(Raw::Wkb(slice(b)?, slice(o)?)),
            PolygonInput::Rings(tag, c, r) if tag == "rings" => Ok(Raw::Rings(slice(c)?, slice(r)?)),
            PolygonInput::Wkb(tag, ..) | PolygonInput::Rings(tag, ..) => Err(bad(tag)),
        }
    }
}

/// Run `f` on the checked polygons (decoding WKB first where needed).
fn with_polygons<T>(raw: Raw<'_>, f: impl FnOnce(&Polygons<'_>) -> Result<T>) -> Result<T> {
    match raw {
        Raw::Wkb(bytes, offsets) => f(&decode_polygons(bytes, offsets)?.polygons()?),
        Raw::Rings(coords, rings) => {
            let one_each: Vec<i64> = (0..rings.len() as i64).collect();
            f(&Polygons::new(coords, rings, &one_each, &one_each)?)
        }
    }
}

/// Read the units and run `f` on them without the GIL.
pub fn with_polygon_input<T: Send>(
    py: Python<'_>,
    polygons: PolygonInput<'_>,
    f: impl FnOnce(&Polygons<'_>, &Guard) -> Result<T> + Send,
) -> PyResult<T> {
    let raw = polygons.raw()?;
    run(py, |g| with_polygons(raw, |p| f(p, g)))
}

type ContiguityOut<'py> = (CsrOut<'py>, Bound<'py, PyArray1<f64>>, Vec<usize>);

/// Contiguity: ((indptr, indices, shared lengths), perimeters, empty units).
#[pyfunction]
pub fn contiguity<'py>(
    py: Python<'py>,
    polygons: PolygonInput<'py>,
    rule: &str,
    tolerance: f64,
    metric: &str,
) -> PyResult<ContiguityOut<'py>> {
    let out = with_polygon_input(py, polygons, |p, g| {
        core::contiguity(p, Rule::parse(rule)?, tolerance, Metric::parse(metric)?, g)
    })?;
    Ok((csr_out(py, out.graph), out.perimeter.into_pyarray(py), out.empty))
}

/// Cliff-Ord weights: ((indptr, indices, weights), perimeters, empty units).
#[pyfunction]
pub fn cliff_ord<'py>(
    py: Python<'py>,
    polygons: PolygonInput<'py>,
    border_power: f64,
    distance_power: f64,
    tolerance: f64,
    metric: &str,
) -> PyResult<ContiguityOut<'py>> {
    let (w, info) = with_polygon_input(py, polygons, |p, g| {
        core::cliff_ord(p, border_power, distance_power, tolerance, Metric::parse(metric)?, g)
    })?;
    Ok((csr_out(py, w), info.perimeter.into_pyarray(py), info.empty))
}

/// Centroids of polygons as interleaved x, y (NaN for empty units).
#[pyfunction]
pub fn centroids<'py>(py: Python<'py>, polygons: PolygonInput<'py>) -> PyResult<Bound<'py, PyArray1<f64>>> {
    let out = with_polygon_input(py, polygons, |p, _| core::centroids(p))?;
    Ok(out.into_pyarray(py))
}
