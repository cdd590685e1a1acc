//! Open standard encodings: Well-Known Binary polygons in, weights files
//! (Matrix Market, triplet text) in and out.

pub mod ids;
pub mod matrix_market;
mod text;
pub mod triplet;
pub mod wkb;

pub use matrix_market::WeightsFile;
