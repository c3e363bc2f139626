//! Typed errors: small `Copy` enums with a `Display` message; no allocation.
use core::fmt;

/// Which tensor of a layer (or of the model's input stage) an error is about.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum TensorKind {
    /// The weight matrix.
    Weights,
    /// The bias vector.
    Bias,
    /// The per-channel weight scales.
    WeightScale,
    /// The per-channel fixed-point multipliers.
    Multiplier,
    /// The per-channel shifts.
    Shift,
    /// The scaler's offsets.
    ScalerOffset,
    /// The scaler's scales.
    ScalerScale,
    /// The integer input path's tables.
    IntegerInput,
}

impl TensorKind {
    const fn name(self) -> &'static str {
        match self {
            TensorKind::Weights => "weights",
            TensorKind::Bias => "bias",
            TensorKind::WeightScale => "weight scales",
            TensorKind::Multiplier => "multipliers",
            TensorKind::Shift => "shifts",
            TensorKind::ScalerOffset => "scaler offsets",
            TensorKind::ScalerScale => "scaler scales",
            TensorKind::IntegerInput => "integer input tables",
        }
    }
}

/// Why a blob was rejected by [`crate::Model::parse`]. `FORMAT.md` §5 lists each rule.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum FormatError {
    /// Fewer bytes than the fixed header, or fewer than the header's total length.
    TooShort {
        /// Bytes the blob needs.
        needed: u32,
        /// Bytes given.
        got: u32,
    },
    /// The first four bytes are not the format's magic.
    BadMagic,
    /// A format version this reader does not know.
    UnsupportedVersion {
        /// The version in the header.
        found: u16,
    },
    /// The header's version is not the one the layer table needs: every blob carries the lowest
    /// version that holds it (`FORMAT.md` §2), so the version field is checked as strictly as
    /// the bytes the CRC covers.
    VersionMismatch {
        /// The version in the header.
        header: u16,
        /// The version the layer table needs.
        body: u16,
    },
    /// Reserved header flags are set.
    ReservedFlags,
    /// More bytes were given than the header's total length.
    LengthMismatch {
        /// The header's total length.
        header: u32,
        /// Bytes given.
        got: u32,
    },
    /// The CRC-32 of the body does not match the header.
    ChecksumMismatch {
        /// The header's CRC.
        stored: u32,
        /// The CRC computed over the bytes.
        computed: u32,
    },
    /// The body is not a valid layer table (postcard decoding failed).
    Malformed,
    /// Bytes remain after the layer table.
    TrailingBytes,
    /// The model has no layers.
    NoLayers,
    /// The input width, or a layer's width, is zero.
    ZeroSized {
        /// Layer index (0-based); `None` for the model input.
        layer: Option<u8>,
    },
    /// A width exceeds [`crate::wire::format::MAX_WIDTH`].
    TooWide {
        /// Layer index; `None` for the model input.
        layer: Option<u8>,
    },
    /// A layer's input width is not the previous layer's output width (or the model input).
    ShapeMismatch {
        /// Layer index.
        layer: u8,
    },
    /// A tensor's byte length disagrees with the shapes.
    TensorLength {
        /// Layer index; `None` for the input stage.
        layer: Option<u8>,
        /// Which tensor.
        tensor: TensorKind,
    },
    /// A `Blocked4x4` or `Nibble4x4` weight field has a non-zero alignment byte or padding weight.
    NonZeroPadding {
        /// Layer index.
        layer: Option<u8>,
    },
    /// Quantisation parameters missing on an int8 model or present on an f32 model, or int4
    /// (`Nibble4x4`) weights on an f32 model.
    PrecisionMismatch {
        /// Layer index; `None` for the input stage.
        layer: Option<u8>,
    },
    /// A requantisation shift outside `[-31, 31]` or an input shift above 62.
    ShiftOutOfRange {
        /// Layer index; `None` for the input stage.
        layer: Option<u8>,
        /// Output channel or feature.
        channel: u32,
    },
    /// A fixed-point multiplier outside `[2^30, 2^31 - 1]`.
    MultiplierOutOfRange {
        /// Layer index.
        layer: u8,
        /// Output channel.
        channel: u32,
    },
    /// A quantisation scale that is not finite and positive, or so large that its int8 tensor's
    /// extreme values overflow f32.
    BadScale {
        /// Layer index; `None` for the input stage.
        layer: Option<u8>,
    },
    /// A NaN or infinite value in a float tensor.
    NonFinite {
        /// Layer index; `None` for the input stage.
        layer: Option<u8>,
        /// Which tensor.
        tensor: TensorKind,
    },
    /// A sigmoid output on a last layer with more than one output.
    SigmoidWidth,
    /// The number of class labels is not the number of classes.
    LabelCount {
        /// Classes the model has.
        expected: u32,
        /// Labels in the blob.
        found: u32,
    },
    /// Some int8 input could overflow a layer's int32 accumulator.
    AccumulatorOverflow {
        /// Layer index.
        layer: u8,
        /// Output channel.
        channel: u32,
    },
    /// An f32 model, and this runtime was built without the `f32` feature (int8 only).
    F32NotBuiltIn,
    /// A layer with int4 weights, and this runtime was built without the `int4` feature.
    Int4NotBuiltIn {
        /// Layer index.
        layer: u8,
    },
    /// An int16 input tensor (format version 7), and this runtime was built without the
    /// `int16-input` feature.
    Int16InputNotBuiltIn,
    /// An int16 input tensor with a non-zero zero point: int16 inputs are symmetric
    /// (`FORMAT.md` §3.6).
    InputZeroPoint,
    /// A pointwise activation's kind byte is not one this reader knows.
    UnknownActivation {
        /// Layer index.
        layer: u8,
        /// The kind byte.
        kind: u8,
    },
    /// A pointwise activation record does not fit the precision: an int8 layer without its
    /// 256-entry table, an f32 layer with a table or the wrong number of parameters, or a
    /// non-zero zero point on an f32 layer.
    ActivationRecord {
        /// Layer index.
        layer: u8,
    },
    /// A pointwise activation parameter is NaN or infinite, or a `Clip` has `lo > hi`.
    ActivationParams {
        /// Layer index.
        layer: u8,
    },
    /// The header's scratch size is not the size the layer table needs.
    ScratchMismatch {
        /// The header's value.
        header: u32,
        /// The computed value.
        computed: u32,
    },
}

impl fmt::Display for FormatError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        use FormatError::*;
        let at = |f: &mut fmt::Formatter<'_>, layer: &Option<u8>| match layer {
            Some(l) => write!(f, "layer {l}"),
            None => f.write_str("input stage"),
        };
        match self {
            TooShort { needed, got } => {
                write!(f, "blob truncated: needs {needed} bytes, got {got}")
            }
            BadMagic => f.write_str("not a Kinglet model: wrong magic bytes"),
            UnsupportedVersion { found } => write!(
                f,
                "model format version {found} is not supported (this reader accepts versions {} to {})",
                crate::wire::version::OLDEST_VERSION,
                crate::wire::version::FORMAT_VERSION
            ),
            VersionMismatch { header, body } => write!(
                f,
                "the header says format version {header}, but the layer table is version {body} (a blob carries exactly the version its table needs)"
            ),
            ReservedFlags => f.write_str("reserved header flags are set"),
            LengthMismatch { header, got } => write!(
                f,
                "blob length {got} disagrees with the header's total length {header}"
            ),
            ChecksumMismatch { stored, computed } => write!(
                f,
                "checksum mismatch: header says {stored:#010x}, body hashes to {computed:#010x}"
            ),
            Malformed => f.write_str("malformed layer table"),
            TrailingBytes => f.write_str("unexpected bytes after the layer table"),
            NoLayers => f.write_str("the model has no layers"),
            ZeroSized { layer } => {
                at(f, layer)?;
                f.write_str(": zero-sized tensor")
            }
            TooWide { layer } => {
                at(f, layer)?;
                write!(f, ": wider than {} elements", crate::wire::format::MAX_WIDTH)
            }
            ShapeMismatch { layer } => write!(
                f,
                "layer {layer}: input width does not match the previous output width"
            ),
            TensorLength { layer, tensor } => {
                at(f, layer)?;
                write!(f, ": {} length disagrees with the shape", tensor.name())
            }
            NonZeroPadding { layer } => {
                at(f, layer)?;
                f.write_str(": blocked weights have a non-zero padding or alignment byte")
            }
            PrecisionMismatch { layer } => {
                at(f, layer)?;
                f.write_str(": quantisation parameters do not match the model precision")
            }
            ShiftOutOfRange { layer, channel } => {
                at(f, layer)?;
                write!(f, ": shift out of range at channel {channel}")
            }
            MultiplierOutOfRange { layer, channel } => write!(
                f,
                "layer {layer}: fixed-point multiplier out of range at channel {channel}"
            ),
            BadScale { layer } => {
                at(f, layer)?;
                f.write_str(": quantisation scale must be finite, positive and small enough that every int8 step stays finite in f32")
            }
            NonFinite { layer, tensor } => {
                at(f, layer)?;
                write!(f, ": NaN or infinity in {}", tensor.name())
            }
            SigmoidWidth => f.write_str("a sigmoid output needs exactly one output unit"),
            LabelCount { expected, found } => {
                write!(f, "{found} class labels for {expected} classes")
            }
            AccumulatorOverflow { layer, channel } => write!(
                f,
                "layer {layer}: int32 accumulator could overflow at channel {channel}"
            ),
            F32NotBuiltIn => f.write_str(
                "f32 model, but this runtime was built without the `f32` feature (int8 models only)",
            ),
            Int4NotBuiltIn { layer } => write!(
                f,
                "layer {layer}: int4 weights, but this runtime was built without the `int4` feature"
            ),
            Int16InputNotBuiltIn => f.write_str(
                "int16 input tensor, but this runtime was built without the `int16-input` feature",
            ),
            InputZeroPoint => {
                f.write_str("input stage: an int16 input tensor must have zero point 0")
            }
            UnknownActivation { layer, kind } => {
                write!(f, "layer {layer}: unknown activation kind {kind}")
            }
            ActivationRecord { layer } => write!(
                f,
                "layer {layer}: activation record does not match the precision (int8: a 256-entry table; f32: the kind's parameters)"
            ),
            ActivationParams { layer } => write!(
                f,
                "layer {layer}: activation parameter is NaN, infinite or out of order"
            ),
            ScratchMismatch { header, computed } => write!(
                f,
                "header scratch size {header} disagrees with the computed {computed}"
            ),
        }
    }
}

impl core::error::Error for FormatError {}

/// Why an inference call was refused. Nothing is written to the scores on error.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum RunError {
    /// The input slice is not the model's input width.
    InputLength {
        /// The model's input width.
        expected: u32,
        /// Elements given.
        got: u32,
    },
    /// The scratch buffer is smaller than [`crate::Model::scratch_bytes`].
    ScratchTooSmall {
        /// Bytes needed.
        needed: u32,
        /// Bytes given.
        got: u32,
    },
    /// The score slice is shorter than [`crate::Model::output_len`].
    ScoresTooSmall {
        /// Elements needed.
        needed: u32,
        /// Elements given.
        got: u32,
    },
    /// A float input is NaN or infinite.
    NonFiniteInput {
        /// Feature index.
        index: u32,
    },
    /// An f32 model produced a NaN or infinite output (inputs far outside the trained range).
    NonFiniteOutput,
    /// `Input::I16` or `Input::U8` on an int8 blob packed without the integer input path
    /// (format version 5 may leave it out; [`crate::Model::takes_integer_input`] tells).
    NoIntegerInput,
}

impl fmt::Display for RunError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            RunError::InputLength { expected, got } => {
                write!(f, "input has {got} features, the model takes {expected}")
            }
            RunError::ScratchTooSmall { needed, got } => {
                write!(
                    f,
                    "scratch buffer too small: needs {needed} bytes, got {got}"
                )
            }
            RunError::ScoresTooSmall { needed, got } => {
                write!(f, "score buffer too small: needs {needed}, got {got}")
            }
            RunError::NonFiniteInput { index } => {
                write!(f, "input feature {index} is NaN or infinite")
            }
            RunError::NonFiniteOutput => {
                f.write_str("the model produced a non-finite output (input far out of range)")
            }
            RunError::NoIntegerInput => f.write_str(
                "this int8 blob has no integer input path: feed f32 features, or pack it with `kinglet pack --integer-input`",
            ),
        }
    }
}

impl core::error::Error for RunError {}

/// Either error, for callers that parse and run in one place.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Error {
    /// The blob was rejected.
    Format(FormatError),
    /// An inference call was refused.
    Run(RunError),
}

impl From<FormatError> for Error {
    fn from(e: FormatError) -> Self {
        Error::Format(e)
    }
}

impl From<RunError> for Error {
    fn from(e: RunError) -> Self {
        Error::Run(e)
    }
}

impl fmt::Display for Error {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Error::Format(e) => e.fmt(f),
            Error::Run(e) => e.fmt(f),
        }
    }
}

impl core::error::Error for Error {}
