//! # kinglet-runtime
//!
//! Allocation-free inference for small dense classifiers on microcontrollers.
//!
//! A model is a *blob* (see `FORMAT.md` in the repository) that the firmware keeps in flash and
//! reads in place. [`Model::parse`] checks everything once — header, checksum, every length,
//! every shape, every quantisation parameter, and that no int8 accumulator can overflow — and
//! returns a validated [`Model`]. After that, inference cannot panic or read out of bounds.
//!
//! Embed the blob with [`embed_blob!`], which places it at a 4-byte aligned address (what the
//! Cortex-M4 kernels need; [`Model::weights_aligned`] tells). Inference works in a
//! caller-owned *arena* whose exact size the blob states in its header, so a firmware can size
//! a `static` at build time with the `const fn` [`arena_bytes`], and its feature and score
//! buffers with [`input_len`] and [`output_len`]:
//!
//! ```
//! use kinglet_runtime::{arena_bytes, embed_blob, input_len, output_len, Input, Model};
//! // In firmware the path is your blob's, relative to the file (as with `include_bytes!`).
//! const MODEL: &[u8] = embed_blob!("../../firmware-example/models/digits.kgl");
//! # fn main() -> Result<(), kinglet_runtime::Error> {
//! let model = Model::parse(MODEL)?;
//! assert!(model.weights_aligned());
//! let mut arena = [0u8; arena_bytes(MODEL)];
//! let mut scores = [0f32; output_len(MODEL)];
//! let features = [0.5f32; input_len(MODEL)];
//! let prediction = model.infer(Input::F32(&features), &mut arena, &mut scores)?;
//! # let _ = prediction;
//! # Ok(())
//! # }
//! ```
//!
//! The steps a sample goes through each have a module: [`scale`] (the saved input scaler and
//! input quantisation), [`dense`] (int8 and f32 kernels), [`requant`] (integer-only
//! requantisation after Jacob et al., 2018), [`output`] (softmax, sigmoid, argmax) and
//! [`arena`] (buffer planning).
#![cfg_attr(not(test), no_std)]
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

pub mod arena;
mod classify;
pub mod dense;
mod embed;
#[cfg(any(test, feature = "encode"))]
pub mod encode;
mod error;
pub mod format;
pub mod header;
mod le;
mod model;
pub mod output;
pub mod requant;
pub mod scale;
mod stage;
mod validate;
mod widths;

pub use embed::AlignedBlob;
pub use error::{Error, FormatError, RunError, TensorKind};
pub use format::{Activation, OutputKind, Precision};
pub use header::{arena_bytes, blob_len, CHECKSUM, FORMAT_VERSION, HEADER_LEN, MAGIC};
pub use model::{Input, LayerView, Model, Prediction};
pub use stage::{Activations, Stage};
pub use widths::{input_len, output_len};
