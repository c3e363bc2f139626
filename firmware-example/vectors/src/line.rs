//! One vector → one line of text, in a fixed format.
//!
//! ```text
//! <set> <index:03> label=<true class> class=<predicted> score=<f32 bits, 8 hex> out=<last layer> [feat=<15 × f32 bits>]
//! ```
//!
//! `out` lists the last layer's outputs before softmax: int8 values in decimal for int8 models,
//! f32 bit patterns in hex for f32 models. `score` is the predicted class's probability as an
//! f32 bit pattern. `feat` (vibration only) lists the 15 features as f32 bit patterns. Every
//! number is printed as exact bits, so equal lines mean bit-identical results.
use crate::{assets, Path, VectorSet};
use core::fmt::Write;
use kinglet_runtime::{Activations, Input, Model, Prediction, Stage};
use kinglet_vibration_features::{window_features, window_from_le_bytes, FEATURES};

/// Capacity of one line in bytes.
pub const LINE_CAPACITY: usize = 384;

/// Most outputs a vector model may have.
pub const MAX_OUTPUTS: usize = 16;

/// One formatted line.
pub type Line = heapless::String<LINE_CAPACITY>;

/// Why a vector could not be formatted.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum VectorError {
    /// The model blob was rejected.
    Format(kinglet_runtime::FormatError),
    /// Inference refused the call.
    Run(kinglet_runtime::RunError),
    /// The input row does not exist in the assets.
    MissingInput,
    /// The model has more outputs than [`MAX_OUTPUTS`].
    TooManyOutputs,
    /// The line did not fit in [`LINE_CAPACITY`].
    LineTooLong,
    /// An expected line (of a model of your own) is not in the vectors format, or has no
    /// inputs (`kinglet score --format vectors --with-inputs` writes them).
    BadExpectedLine,
    /// The model takes more inputs than [`crate::own::MAX_INPUTS`].
    TooManyInputs,
}

impl From<core::fmt::Error> for VectorError {
    fn from(_: core::fmt::Error) -> Self {
        VectorError::LineTooLong
    }
}

/// The last layer's outputs as captured during inference.
pub(crate) enum Outputs {
    Int8([i8; MAX_OUTPUTS]),
    F32([u32; MAX_OUTPUTS]),
}

/// Runs vector `i` of `set` (0-based within the set) and writes its line into `line`.
///
/// `model` must be `set.model` parsed; `scratch` needs `model.scratch_bytes()` bytes. Returns the
/// predicted class.
pub fn format_vector(
    set: &VectorSet,
    model: &Model<'_>,
    i: usize,
    scratch: &mut [u8],
    line: &mut Line,
) -> Result<usize, VectorError> {
    line.clear();
    let n_out = model.output_len();
    let row = set.first + i;
    let mut scores = [0f32; MAX_OUTPUTS];
    let mut features = [0f32; FEATURES];
    let (label, run) = match set.path {
        Path::DigitsU8 | Path::DigitsF32 => {
            let pixels = assets::digits_row(row).ok_or(VectorError::MissingInput)?;
            let label = *assets::DIGITS_LABELS
                .get(row)
                .ok_or(VectorError::MissingInput)?;
            let p = if set.path == Path::DigitsU8 {
                run_traced(model, Input::U8(pixels), scratch, &mut scores)
            } else {
                let mut x = [0f32; assets::DIGITS_PIXELS];
                for (d, &p) in x.iter_mut().zip(pixels) {
                    *d = f32::from(p);
                }
                run_traced(model, Input::F32(&x), scratch, &mut scores)
            };
            (label, p)
        }
        Path::Vibration => {
            let raw = assets::replay_window(row).ok_or(VectorError::MissingInput)?;
            let window = window_from_le_bytes(raw).ok_or(VectorError::MissingInput)?;
            let label = *assets::REPLAY_LABELS
                .get(row)
                .ok_or(VectorError::MissingInput)?;
            features = window_features(&window);
            let p = run_traced(model, Input::F32(&features), scratch, &mut scores);
            (label, p)
        }
    };
    let (prediction, outputs) = run?;

    write!(line, "{} {:03} label={} ", set.name, i, label)?;
    write_result(line, &prediction, &outputs, n_out)?;
    if set.path == Path::Vibration {
        line.push_str(" feat=")
            .map_err(|_| VectorError::LineTooLong)?;
        for (k, f) in features.iter().enumerate() {
            let sep = if k == 0 { "" } else { "," };
            write!(line, "{sep}{:08x}", f.to_bits())?;
        }
    }
    Ok(prediction.class)
}

/// Runs `input` through `model` with a trace that keeps the last layer's outputs.
pub(crate) fn run_traced(
    model: &Model<'_>,
    input: Input<'_>,
    scratch: &mut [u8],
    scores: &mut [f32; MAX_OUTPUTS],
) -> Result<(Prediction, Outputs), VectorError> {
    let n_out = model.output_len();
    if n_out > MAX_OUTPUTS {
        return Err(VectorError::TooManyOutputs);
    }
    let last = model.layers().count();
    let mut outputs = Outputs::Int8([0; MAX_OUTPUTS]);
    let mut capture = |stage: &Stage<'_>| {
        if stage.index != last {
            return;
        }
        outputs = match stage.values {
            // An int16 tensor is only ever the input (stage 0), never the last layer's.
            Activations::Int8 { .. } | Activations::Int16 { .. } => {
                let mut v = [0i8; MAX_OUTPUTS];
                for (k, slot) in v.iter_mut().enumerate().take(n_out) {
                    *slot = stage.values.int8(k).unwrap_or(0);
                }
                Outputs::Int8(v)
            }
            Activations::F32 { .. } => {
                let mut v = [0u32; MAX_OUTPUTS];
                for (k, slot) in v.iter_mut().enumerate().take(n_out) {
                    *slot = stage.values.real(k).unwrap_or(0.0).to_bits();
                }
                Outputs::F32(v)
            }
        };
    };
    let p = model
        .infer_traced(input, scratch, scores, &mut capture)
        .map_err(VectorError::Run)?;
    Ok((p, outputs))
}

/// Writes `class=<class> score=<bits> out=<outputs>` for a result of [`run_traced`].
pub(crate) fn write_result(
    line: &mut Line,
    prediction: &Prediction,
    outputs: &Outputs,
    n_out: usize,
) -> Result<(), VectorError> {
    write!(
        line,
        "class={} score={:08x} out=",
        prediction.class,
        prediction.score.to_bits()
    )?;
    for k in 0..n_out {
        let sep = if k == 0 { "" } else { "," };
        match outputs {
            Outputs::Int8(v) => write!(line, "{sep}{}", v.get(k).copied().unwrap_or(0))?,
            Outputs::F32(v) => write!(line, "{sep}{:08x}", v.get(k).copied().unwrap_or(0))?,
        }
    }
    Ok(())
}
