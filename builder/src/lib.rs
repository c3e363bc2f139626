//! # kinglet-builder
//!
//! One owned, freely editable copy of a blob's layer table ([`OwnedModel`]) and the blob
//! writing around it, for the host side. The converter packs through it; the runtime's tests,
//! the cross-crate tests, the fuzz targets and the kernel benchmark build their blobs with it.
//! A new format field is then a change in one place ([`owned`]).
//!
//! - [`OwnedModel::encode_to_vec`] and [`OwnedModel::encode_in`] write valid blobs through the
//!   runtime's validating encoder (`kinglet_runtime::unstable::encode::encode`);
//! - [`raw_blob`], [`OwnedModel::raw_blob`] and [`raw_blob_with_layers`] write any table, valid
//!   or not, behind a correct header, so that a test reaches exactly the rule it is about;
//! - [`reseal`] makes a blob's length and CRC right again after a test changed its bytes;
//! - [`le`] turns typed values into the wire bytes of tensors, [`blocked`] converts weights
//!   between the layouts of `FORMAT.md` §3.1, [`sample`] holds three small hand-worked models,
//!   and `npy` (feature `npy`) writes `.npy` arrays for tests and benchmarks.
#![deny(missing_docs)]

pub mod blocked;
mod error;
pub mod le;
#[cfg(feature = "npy")]
pub mod npy;
pub mod owned;
pub mod raw;
pub mod sample;

pub use error::BuildError;
pub use kinglet_runtime::unstable::encode::{reseal, seal};
/// The table's enums, for filling in an [`OwnedModel`]. (The runtime's own unit tests name them
/// from here: they see a second copy of the runtime crate, whose types are not these.)
pub use kinglet_runtime::unstable::wire::format::{
    InputWidth, OutputKind, Precision, WeightLayout,
};
pub use owned::{Activation, OwnedInput, OwnedLayer, OwnedModel, OwnedQuant};
pub use raw::{planned_scratch, raw_blob, raw_blob_with_layers};
