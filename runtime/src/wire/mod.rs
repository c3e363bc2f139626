//! The wire format: the Rust mirror of `FORMAT.md` — the header, the postcard-encoded model
//! description, the format versions and the geometry of the blocked weight layout. The reader
//! ([`crate::Model::parse`]), the kernels and the writers (`encode`, the converter) share it.
pub mod format;
pub mod header;
pub mod layout;
pub mod nibble;
pub mod read;
pub mod version;
