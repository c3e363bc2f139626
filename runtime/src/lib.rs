//! # kinglet-runtime
//!
//! Allocation-free inference for small dense classifiers on microcontrollers.
//!
//! A model is a *blob* (specified in `FORMAT.md`, shipped with this crate) that the firmware keeps in flash and
//! reads in place. [`Model::parse`] checks everything once — header, checksum, every length,
//! every shape, every quantisation parameter, and that no int8 accumulator can overflow — and
//! returns a validated [`Model`]. After that, inference cannot panic or read out of bounds.
//!
//! Embed the blob with [`embed_blob!`], which places it at a 4-byte aligned address (what the
//! Cortex-M4 kernels need; [`Model::weights_aligned`] tells). Inference works in a
//! caller-owned *scratch buffer* whose exact size the blob states in its header, so a firmware
//! can size a `static` at build time with the `const fn` [`scratch_bytes`], and its feature and
//! score buffers with [`input_len`] and [`output_len`]:
//!
//! ```
//! use kinglet_runtime::{embed_blob, input_len, output_len, scratch_bytes, Input, Model};
//! // In firmware the path is your blob's, relative to the file (as with `include_bytes!`).
//! const MODEL: &[u8] = embed_blob!("../../firmware-example/models/digits.kgl");
//! # fn main() -> Result<(), kinglet_runtime::Error> {
//! let model = Model::parse(MODEL)?;
//! assert!(model.weights_aligned());
//! let mut scratch = [0u8; scratch_bytes(MODEL)];
//! let mut scores = [0f32; output_len(MODEL)];
//! let features = [0.5f32; input_len(MODEL)];
//! let prediction = model.infer(Input::F32(&features), &mut scratch, &mut scores)?;
//! # let _ = prediction;
//! # Ok(())
//! # }
//! ```
//!
//! ## Stable and unstable
//!
//! The crate root is the stable surface, all a firmware needs: [`Model`] (`parse`, `infer`,
//! `classify`, `label`, sizes), [`Input`], [`Prediction`], the errors ([`Error`],
//! [`FormatError`], [`RunError`]), the `const fn`s [`scratch_bytes`], [`blob_len`],
//! [`input_len`] and [`output_len`], [`embed_blob!`] with [`AlignedBlob`], and the header
//! constants. Everything else — the wire types, the kernels, requantisation, the scaler, the
//! scratch plan and the encoder — is in [`unstable`], public for the converter, the tests, the
//! fuzz targets and `kernel-bench`, and free to change in any release. A few
//! inspection methods of [`Model`] (`desc`, `layers`, `scratch_plan`) return `unstable` types
//! and share their status.
//!
//! ## Cargo features
//!
//! - `f32` (default): f32 models. Without it the runtime is int8-only and
//!   [`Model::parse`] refuses f32 blobs with [`FormatError::F32NotBuiltIn`].
//! - `int4` (default): int4 weights (`Nibble4x4`, format version 6) and their kernels. Without
//!   it [`Model::parse`] refuses a blob with an int4 layer with [`FormatError::Int4NotBuiltIn`].
//! - `int16-input` (default): an int16 input tensor (format version 7) and the first-layer
//!   kernels that read it. Without it [`Model::parse`] refuses such a blob with
//!   [`FormatError::Int16InputNotBuiltIn`].
//! - `defmt`: `defmt::Format` for the error and result types.
//! - `encode`: the blob encoder, `unstable::encode` (host tools).
#![cfg_attr(not(test), no_std)]
#![cfg_attr(docsrs, feature(doc_cfg))]
// `deny`, not `forbid`: the Cortex-M kernels (`dense::asm`, the one module with `asm!`)
// allow it locally.
#![deny(unsafe_code)]
#![deny(missing_docs)]
#![cfg_attr(
    not(test),
    deny(
        clippy::unwrap_used,
        clippy::expect_used,
        clippy::panic,
        clippy::indexing_slicing
    )
)]

mod classify;
mod embed;
mod error;
mod le;
mod model;
mod stage;
pub mod unstable;
mod validate;
mod widths;

pub use embed::AlignedBlob;

// Crate-internal short paths (`crate::dense`, `crate::wire`, ...) to the unstable modules.
use unstable::{dense, output, requant, scale, scratch, wire};

pub use error::{Error, FormatError, RunError, TensorKind};
pub use model::{Input, LayerView, Model, Prediction};
pub use stage::{Activations, Stage};
pub use widths::{input_len, output_len};
pub use wire::format::{Activation, OutputKind, PointwiseDesc, Precision};
pub use wire::header::{blob_len, scratch_bytes, CHECKSUM, HEADER_LEN, MAGIC};
pub use wire::version::FORMAT_VERSION;
