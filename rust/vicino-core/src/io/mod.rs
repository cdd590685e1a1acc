//! Reading geometry from open standard encodings into flat buffers.

pub mod wkb;
