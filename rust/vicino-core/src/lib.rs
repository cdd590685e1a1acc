//! vicino-core: spatial weights without Python.
//!
//! Build who-neighbours-whom graphs from locations ([`neighbors`]), bring
//! them to a standard scale ([`standardize`]), and use them: spatial lags
//! ([`lag`]) and global autocorrelation statistics ([`stats`]); check and
//! derive them as graphs ([`graph`]) and repair them ([`repair`]). Every
//! matrix is a canonical CSR ([`csr`]). Parallel work uses rayon above size
//! thresholds and never changes a result with the number of threads.

pub mod contiguity;
pub mod csr;
pub mod distance_weights;
pub mod edges;
pub mod error;
pub mod frame;
pub mod graph;
pub mod guard;
pub mod io;
pub mod lag;
pub mod neighbors;
pub mod repair;
pub mod spectral;
pub mod standardize;
pub mod stats;

pub use csr::{Csr, CsrRef};
pub use error::{Error, Result};
pub use guard::Guard;
