//! Inverse-distance and kernel weights of points.

use crate::convert::{csr_out, slice, CsrOut};
use crate::errors::run;
use numpy::{IntoPyArray, PyArray1, PyReadonlyArray1};
use pyo3::prelude::*;
use vicino_core::distance_weights::{self as dw, Bandwidth, Coincident, Cutoff, Kernel, PointWeights};
use vicino_core::neighbors::Metric;

/// ((indptr, indices, weights), distances, units sharing a location)
type Out<'py> = (CsrOut<'py>, Bound<'py, PyArray1<f64>>, usize);

fn out(py: Python<'_>, w: PointWeights) -> Out<'_> {
    (csr_out(py, w.graph), w.distances.into_pyarray(py), w.duplicate_units)
}

/// Inverse-distance weights; `cutoff` is ("radius", r), ("k", k) or ("all", 0).
#[pyfunction]
pub fn inverse_distance<'py>(
    py: Python<'py>,
    xy: PyReadonlyArray1<'py, f64>,
    metric: &str,
    power: f64,
    cutoff: (String, f64),
    floor: Option<f64>,
    coincident: &str,
) -> PyResult<Out<'py>> {
    let xy = slice(&xy)?;
    let w = run(py, |g| {
        let cut = match cutoff.0.as_str() {
            "radius" => Cutoff::Radius(cutoff.1),
            "k" => Cutoff::Nearest(cutoff.1 as usize),
            _ => Cutoff::Everyone,
        };
        dw::inverse_distance_points(xy, Metric::parse(metric)?, power, cut, floor, Coincident::parse(coincident)?, g)
    })?;
    Ok(out(py, w))
}

/// Kernel weights; `bandwidth` is ("fixed", h) or ("adaptive", k).
#[pyfunction]
pub fn kernel_weights<'py>(
    py: Python<'py>,
    xy: PyReadonlyArray1<'py, f64>,
    metric: &str,
    kernel: &str,
    bandwidth: (String, f64),
    self_weight: bool,
) -> PyResult<Out<'py>> {
    let xy = slice(&xy)?;
    let w = run(py, |g| {
        let b = if bandwidth.0 == "fixed" {
            Bandwidth::Fixed(bandwidth.1)
        } else {
            Bandwidth::Adaptive(bandwidth.1 as usize)
        };
        dw::kernel_points(xy, Metric::parse(metric)?, Kernel::parse(kernel)?, b, self_weight, g)
    })?;
    Ok(out(py, w))
}
