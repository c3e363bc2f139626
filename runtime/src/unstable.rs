//! **Unstable**: the runtime's building blocks, public for the converter, the builder, the fuzz
//! targets, `kernel-bench` and the tests — not for firmware. Anything here may change in any
//! release, including a patch release; a firmware should need only the crate root.
//!
//! - [`wire`]: the Rust mirror of `FORMAT.md` (header, model description, versions, the
//!   blocked weight layout). The blob *bytes* are the stable contract, versioned by
//!   [`FORMAT_VERSION`](crate::FORMAT_VERSION); these types change as the format gains versions.
//! - [`dense`]: the dense kernels, one per target, and their parameter views.
//! - [`requant`]: integer requantisation (Jacob et al., 2018).
//! - [`scale`]: the input scaler and input quantisation.
//! - [`output`]: softmax, sigmoid, argmax.
//! - [`pointwise`]: the pointwise activations (f32 formulas, int8 tables).
//! - [`scratch`]: the scratch-buffer plan.
//! - `encode` (feature `encode`): the blob encoder.
//!
//! Why a module and not a cargo feature: features unify across a build, so an `internals`
//! feature that the converter turns on would be on for every crate built beside it and hide
//! nothing; a module path makes each use site say `unstable`. The modules keep their own files
//! in `src/` (the `#[path]`s below), so moving an item in or out of the stable surface does not
//! move a file.
#[path = "dense/mod.rs"]
pub mod dense;
#[cfg(any(test, feature = "encode"))]
#[cfg_attr(docsrs, doc(cfg(feature = "encode")))]
#[path = "encode.rs"]
pub mod encode;
#[path = "output.rs"]
pub mod output;
#[path = "pointwise.rs"]
pub mod pointwise;
#[path = "requant.rs"]
pub mod requant;
#[path = "scale.rs"]
pub mod scale;
#[path = "scratch.rs"]
pub mod scratch;
#[path = "wire/mod.rs"]
pub mod wire;
