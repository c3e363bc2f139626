//! Why a blob could not be built.
use kinglet_runtime::unstable::encode::EncodeError;
use kinglet_runtime::unstable::wire::format::MAX_LAYERS;
use kinglet_runtime::FormatError;

/// Why [`crate::OwnedModel`] could not be written as a valid blob. The messages are the
/// converter's (`kinglet pack` prints them); none carries a source, so an error chain never says a
/// cause twice.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
#[non_exhaustive]
pub enum BuildError {
    /// More layers than a blob holds.
    #[error("the model has {0} dense layers; the format holds at most {MAX_LAYERS}")]
    TooManyLayers(usize),
    /// The runtime's encoder refused the table.
    #[error("{0}")]
    Encode(EncodeError),
    /// A layer's weight bytes do not fit its shape.
    #[error("internal: {bytes} weight bytes for a {inputs} → {outputs} layer")]
    WeightBytes {
        /// Weight bytes given.
        bytes: usize,
        /// Input width.
        inputs: u32,
        /// Output width.
        outputs: u32,
    },
    /// The reader rejected a blob the encoder wrote.
    #[error("internal: packed blob rejected: {0}")]
    Rejected(FormatError),
    /// The alignment bytes in front of the blocked weights did not settle.
    #[error("internal: weight alignment did not settle")]
    Unsettled,
}
