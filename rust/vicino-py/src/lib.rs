//! vicino._core: the Python binding of vicino-core. It only converts
//! buffers, releases the GIL around core calls (see `errors::run`) and maps
//! errors; all computation lives in the core crate.

mod contiguity;
mod convert;
mod errors;
mod graph;
mod neighbors;
mod stats;
mod weights;

use pyo3::prelude::*;

#[pymodule]
fn _core(m: &Bound<'_, PyModule>) -> PyResult<()> {
    m.add("EARTH_RADIUS_KM", vicino_core::neighbors::EARTH_RADIUS_KM)?;
    m.add_function(wrap_pyfunction!(neighbors::k_nearest, m)?)?;
    m.add_function(wrap_pyfunction!(neighbors::within_distance, m)?)?;
    m.add_function(wrap_pyfunction!(weights::validate, m)?)?;
    m.add_function(wrap_pyfunction!(weights::standardize, m)?)?;
    m.add_function(wrap_pyfunction!(weights::spectral_radius, m)?)?;
    m.add_function(wrap_pyfunction!(weights::lag_vector, m)?)?;
    m.add_function(wrap_pyfunction!(weights::lag_columns, m)?)?;
    m.add_function(wrap_pyfunction!(stats::moran, m)?)?;
    m.add_function(wrap_pyfunction!(contiguity::contiguity, m)?)?;
    m.add_function(wrap_pyfunction!(contiguity::cliff_ord, m)?)?;
    for f in [
        wrap_pyfunction!(graph::health, m)?,
        wrap_pyfunction!(graph::components, m)?,
        wrap_pyfunction!(graph::order, m)?,
        wrap_pyfunction!(graph::combine, m)?,
        wrap_pyfunction!(graph::symmetrize, m)?,
        wrap_pyfunction!(graph::select, m)?,
        wrap_pyfunction!(graph::connect_islands, m)?,
        wrap_pyfunction!(graph::connect_components, m)?,
        wrap_pyfunction!(graph::centroids, m)?,
    ] {
        m.add_function(f)?;
    }
    Ok(())
}
