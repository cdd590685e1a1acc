//! vicino._core: the Python binding of vicino-core. It only converts
//! buffers, releases the GIL around core calls (see `errors::run`) and maps
//! errors; all computation lives in the core crate.

mod contiguity;
mod convert;
mod distance_weights;
mod edges;
mod errors;
mod global_stats;
mod graph;
mod io;
mod local_stats;
mod neighbors;
mod stats;
mod weights;

use pyo3::prelude::*;

/// The memory budget of core calls in bytes (half the physical memory by default).
#[pyfunction]
fn get_memory_limit() -> u64 {
    errors::memory_limit()
}

/// Set the memory budget of core calls in bytes; None restores the default.
#[pyfunction]
#[pyo3(signature = (nbytes))]
fn set_memory_limit(nbytes: Option<u64>) -> PyResult<()> {
    if nbytes == Some(0) {
        return Err(pyo3::exceptions::PyValueError::new_err("the memory limit must be at least 1 byte"));
    }
    errors::set_memory_limit(nbytes.unwrap_or(0));
    Ok(())
}

#[pymodule]
fn _core(m: &Bound<'_, PyModule>) -> PyResult<()> {
    errors::load(m.py())?;
    local_stats::register(m)?;
    m.add("EARTH_RADIUS_KM", vicino_core::neighbors::EARTH_RADIUS_KM)?;
    m.add_class::<stats::MoranOut>()?;
    m.add_class::<graph::HealthOut>()?;
    global_stats::register(m)?;
    m.add_function(wrap_pyfunction!(neighbors::k_nearest, m)?)?;
    m.add_function(wrap_pyfunction!(neighbors::within_distance, m)?)?;
    m.add_function(wrap_pyfunction!(weights::validate, m)?)?;
    m.add_function(wrap_pyfunction!(weights::standardize, m)?)?;
    m.add_function(wrap_pyfunction!(weights::spectral_radius, m)?)?;
    m.add_function(wrap_pyfunction!(weights::eigenvalue_bounds, m)?)?;
    m.add_function(wrap_pyfunction!(weights::lag_vector, m)?)?;
    m.add_function(wrap_pyfunction!(weights::lag_columns, m)?)?;
    m.add_class::<weights::Packed>()?;
    m.add_function(wrap_pyfunction!(weights::pack, m)?)?;
    m.add_function(wrap_pyfunction!(weights::lag_packed_vector, m)?)?;
    m.add_function(wrap_pyfunction!(weights::lag_packed_columns, m)?)?;
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
        wrap_pyfunction!(contiguity::centroids, m)?,
        wrap_pyfunction!(graph::undirected_pairs, m)?,
        wrap_pyfunction!(weights::neighbour_counts, m)?,
        wrap_pyfunction!(edges::from_edges, m)?,
        wrap_pyfunction!(distance_weights::inverse_distance, m)?,
        wrap_pyfunction!(distance_weights::kernel_weights, m)?,
        wrap_pyfunction!(io::read_matrix_market, m)?,
        wrap_pyfunction!(io::write_matrix_market, m)?,
        wrap_pyfunction!(io::read_triplet, m)?,
        wrap_pyfunction!(io::write_triplet, m)?,
        wrap_pyfunction!(io::write_int_ids, m)?,
        wrap_pyfunction!(io::read_int_ids, m)?,
        wrap_pyfunction!(get_memory_limit, m)?,
        wrap_pyfunction!(set_memory_limit, m)?,
    ] {
        m.add_function(f)?;
    }
    Ok(())
}
