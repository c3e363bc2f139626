//! Packing: a [`FloatModel`] into an f32 blob, or, with a calibration set, into an int8 blob;
//! [`request::pack`] is the whole `kinglet pack` (import, scaler, labels, pack, report).
//! Every layer is written in the runtime's `Blocked4x4` layout (4-row blocks, int8 excess-128,
//! data 4-byte aligned within the blob; `FORMAT.md` §3.1), the order the Cortex-M kernels read,
//! by `kinglet_builder` with the runtime's own geometry and validating encoder, unless its
//! padding would take the blob past its size goal ([`size`]): then it is written OutputMajor.
pub mod raw_trial;
pub mod request;
pub mod size;

pub use raw_trial::RawInputChoice;

use anyhow::{bail, Result};
use kinglet_builder::OwnedLayer;
use kinglet_runtime::unstable::wire::format::{InputWidth, Precision};
use kinglet_runtime::Model;

use crate::dataset::Dataset;
use crate::graph::FloatModel;
use crate::layer_table::{owned_table, wire_u32};
use crate::quantise::advice::{self, num, percentile_option, rows_text, suggested_percentile};
use crate::quantise::bias_correction::bias_corrected_bits;
use crate::quantise::calibrate::{range_of, Calibration, RangeMethod, TensorRange};
use crate::quantise::plausible::biases_lost;
use crate::quantise::quantise_input;
use crate::quantise::spread::TensorStats;
use crate::quantise::weight_bits::LayerBits;

/// The f32 blob of `model` (for FPU boards, and the float reference of comparisons).
pub fn pack_f32(model: &FloatModel) -> Result<Vec<u8>> {
    let layers = model
        .layers
        .iter()
        .map(|l| {
            Ok(OwnedLayer::f32(
                wire_u32(l.inputs, "layer width")?,
                wire_u32(l.outputs, "layer width")?,
                crate::layer_table::builder_activation(&l.activation),
                &l.weights,
                &l.bias,
            ))
        })
        .collect::<Result<Vec<_>>>()?;
    let owned = owned_table(model, Precision::F32, None, layers)?;
    size::encode_within_limit(&owned)
}

/// An int8 pack and how it was calibrated.
#[derive(Debug, Clone)]
pub struct Int8Pack {
    /// The blob.
    pub blob: Vec<u8>,
    /// The calibration method used.
    pub method: RangeMethod,
    /// Whether the biases were corrected for the int8 weight rounding.
    pub bias_correction: bool,
    /// What the raw-input trial found (with [`Int8Options::fold_scaler`]).
    pub raw_input: Option<RawInputChoice>,
    /// The calibrated range of each tensor (scaled input, then each layer output).
    pub ranges: Vec<TensorRange>,
    /// Rows in the calibration set.
    pub calibration_rows: usize,
    /// What calibration saw in each tensor (clipped values, far values, spread).
    pub tensors: Vec<TensorStats>,
    /// One line per range that a few far values set, with the option that clips them.
    pub warnings: Vec<String>,
    /// An int16 input tensor's range and how it was taken (`--input-tensor int16`).
    pub wide_input: Option<(TensorRange, WideRange)>,
}

/// The optional sections of an int8 blob to write (`runtime/FORMAT.md` §3.4). Each left out
/// makes the blob format version 5 and smaller; [`Sections::default`] leaves both out.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub struct Sections {
    /// The integer input path's tables (13 bytes per feature, or 13 for a uniform scaler):
    /// needed to feed raw `i16` / `u8` samples (`Input::I16`, `Input::U8`, `--feed i16|u8`).
    pub integer_input: bool,
    /// The per-channel f32 weight scales (4 bytes per layer output), which inference does not
    /// use.
    pub weight_scales: bool,
}

impl Sections {
    /// Both sections kept: the blob a pack wrote before version 5 (version 1 to 3).
    pub const ALL: Sections = Sections {
        integer_input: true,
        weight_scales: true,
    };

    /// Only the integer input path kept: for firmware that feeds raw integer samples.
    pub const INTEGER_INPUT: Sections = Sections {
        integer_input: true,
        weight_scales: false,
    };
}

/// How an int8 pack is calibrated.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Int8Options {
    /// How each tensor's range is taken.
    pub method: RangeMethod,
    /// Correct every layer's bias for the mean error of its int8 weights on the calibration
    /// rows ([`crate::quantise::bias_correction`]).
    pub bias_correction: bool,
    /// When the model has a scaler and the calibration rows are small integers, also pack
    /// the raw input quantised exactly with the scaler folded into the first layer
    /// ([`crate::quantise::raw_input`]) and keep whichever is closer to the float model on the
    /// calibration rows.
    pub fold_scaler: FoldScaler,
    /// The optional sections to write ([`Sections`]).
    pub sections: Sections,
    /// The weight precision of each layer: int8 (the default) or int4 (`FORMAT.md` §3.5, a
    /// format-version-6 blob; [`crate::quantise::weight_bits`]).
    pub weights: LayerBits,
    /// The input tensor's type: int8 (the default) or int16 (`FORMAT.md` §3.6, a
    /// format-version-7 blob; its range from [`wide_input_range`]).
    pub input: InputWidth,
    /// Every layer output's calibrated range is widened this many times about zero
    /// ([`crate::quantise::calibrate::widen`]); 1 keeps them.
    pub headroom: f64,
}

/// Whether to fold the scaler into the first layer and quantise the raw input
/// ([`crate::quantise::raw_input`]).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum FoldScaler {
    /// Keep the scaler in the blob (the default).
    No,
    /// Pack both ways and keep the one closer to the float model on the calibration rows
    /// (`pack --fold-scaler`).
    Try,
    /// Fold whenever it applies, without measuring (for comparisons and tests).
    Always,
}

impl From<RangeMethod> for Int8Options {
    fn from(method: RangeMethod) -> Self {
        Int8Options {
            method,
            bias_correction: false,
            fold_scaler: FoldScaler::No,
            sections: Sections::default(),
            weights: LayerBits::default(),
            input: InputWidth::I8,
            headroom: 1.0,
        }
    }
}

/// Calibrates on `data` (raw feature rows) with `method` and packs the int8 blob without the
/// optional sections ([`Sections::default`]: it takes f32 features only).
pub fn pack_int8(model: &FloatModel, data: &Dataset, method: RangeMethod) -> Result<Int8Pack> {
    pack_int8_sections(model, data, method, Sections::default())
}

/// [`pack_int8`] with every option.
pub fn pack_int8_with(model: &FloatModel, data: &Dataset, opts: Int8Options) -> Result<Int8Pack> {
    pack_int8_options(model, data, opts, &|_| {})
}

/// [`pack_int8`] writing the optional `sections` asked for.
pub fn pack_int8_sections(
    model: &FloatModel,
    data: &Dataset,
    method: RangeMethod,
    sections: Sections,
) -> Result<Int8Pack> {
    pack_int8_observed(model, data, method, sections, &|_| {})
}

/// [`pack_int8_sections`], calling `progress` with the calibration rows just run.
pub fn pack_int8_observed(
    model: &FloatModel,
    data: &Dataset,
    method: RangeMethod,
    sections: Sections,
    progress: &dyn Fn(u64),
) -> Result<Int8Pack> {
    let opts = Int8Options {
        sections,
        ..method.into()
    };
    pack_int8_options(model, data, opts, progress)
}

/// [`pack_int8_with`], calling `progress` with the calibration rows just run.
pub fn pack_int8_options(
    model: &FloatModel,
    data: &Dataset,
    opts: Int8Options,
    progress: &dyn Fn(u64),
) -> Result<Int8Pack> {
    let float_blob = pack_f32(model)?;
    let float_model = Model::parse(&float_blob)
        .map_err(|e| anyhow::anyhow!("internal: float pack rejected: {e}"))?;
    let mut cal = crate::quantise::calibrate::calibrate_widened(
        &float_model,
        data,
        opts.method,
        opts.headroom,
        progress,
    )?;
    let mut wide_input = None;
    if opts.input == InputWidth::I16 {
        if opts.fold_scaler != FoldScaler::No {
            bail!("the raw-input trial quantises the raw input to int8; it does not apply to an int16 input tensor");
        }
        let calibrated = cal
            .ranges
            .first()
            .copied()
            .unwrap_or(TensorRange { min: 0.0, max: 0.0 });
        let (range, how) = wide_input_range(model, data, calibrated);
        let mut sorted = cal.scaled_input.clone();
        sorted.sort_by(f32::total_cmp);
        if let (Some(r), Some(t)) = (cal.ranges.first_mut(), cal.tensors.first_mut()) {
            *r = range;
            *t = TensorStats::of(
                t.tensor.clone(),
                &cal.scaled_input,
                &sorted,
                data.width,
                range,
            );
            // The far-value warning counts int8 steps; an int16 range has 256 times as many.
            t.dominated = false;
        }
        wide_input = Some((range, how));
    }
    check_plausible(model, &cal, &data.source)?;
    let mut pack = finish_int8(
        model,
        &float_model,
        cal,
        Some(data),
        (&data.source, data.rows),
        opts,
    )?;
    pack.wide_input = wide_input;
    Ok(pack)
}

/// Whether [`pack_int8_streamed`] can pack with `opts`: a min/max or percentile range, no
/// raw-input trial, an int8 input and no headroom (the least-error search, the trial, the int16
/// input's domain and the widened statistics need every calibration row).
pub fn streams(opts: &Int8Options) -> bool {
    opts.method != RangeMethod::LeastError
        && opts.fold_scaler == FoldScaler::No
        && opts.input == InputWidth::I8
        && opts.headroom == 1.0
}

/// The pack note on an int16 input tensor's range.
pub fn wide_input_line(range: TensorRange, how: WideRange) -> String {
    let from = match how {
        WideRange::Domain { lo, hi } => format!(
            "every feature's scaled image of the raw values {lo}..{hi}, the smallest and largest in any feature of the calibration rows"
        ),
        WideRange::Widened => format!(
            "the calibrated range {INT16_INPUT_WIDENING} times as wide (the calibration rows are not all whole numbers)"
        ),
    };
    format!(
        "input tensor: int16, symmetric, over [{}, {}]: {from} (format version 7)",
        num(f64::from(range.min)),
        num(f64::from(range.max))
    )
}

/// How [`wide_input_range`] took the int16 input's range.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum WideRange {
    /// The calibration rows are whole numbers: every feature over the pooled raw range
    /// `[lo, hi]` (the smallest and largest raw value of any feature) through its scaler.
    Domain {
        /// Smallest raw value of any feature.
        lo: i64,
        /// Largest raw value of any feature.
        hi: i64,
    },
    /// Other rows: the calibrated input range, [`INT16_INPUT_WIDENING`] times as wide.
    Widened,
}

/// How much wider than the calibrated range an int16 input's range is when the rows are not
/// whole numbers: 16 times costs 4 of its 16 bits and leaves 12, more than int8's 8 (common
/// practice, no source: room beyond the calibration rows is cheap at 16 bits).
pub const INT16_INPUT_WIDENING: f64 = 16.0;

/// The range of an int16 input tensor (`--input-tensor int16`). Whole-number rows (pixels,
/// counts) may take any raw value between the smallest and largest seen in any feature, so the
/// range covers every feature's scaled image of that pooled raw range: a rarely lit pixel's
/// standardised value is within it however far it lies from the calibration rows' values.
/// Other rows get the calibrated range [`INT16_INPUT_WIDENING`] times as wide.
pub fn wide_input_range(
    model: &FloatModel,
    data: &Dataset,
    calibrated: TensorRange,
) -> (TensorRange, WideRange) {
    let whole = data
        .features
        .iter()
        .all(|v| v.fract() == 0.0 && v.abs() <= 65_536.0);
    let (lo, hi) = data
        .features
        .iter()
        .fold((f32::INFINITY, f32::NEG_INFINITY), |(a, b), &v| {
            (a.min(v), b.max(v))
        });
    if !whole || lo > hi {
        let r = crate::quantise::calibrate::widen(calibrated, INT16_INPUT_WIDENING);
        return (r, WideRange::Widened);
    }
    let (offset, scale) = match &model.scaler {
        Some(s) => (s.offset.clone(), s.scale.clone()),
        None => (vec![0.0], vec![1.0]),
    };
    let (mut min, mut max) = (calibrated.min, calibrated.max);
    for (&off, &sc) in offset.iter().zip(&scale) {
        for raw in [lo, hi] {
            let y = (raw - off) * sc;
            min = min.min(y);
            max = max.max(y);
        }
    }
    (
        TensorRange { min, max },
        WideRange::Domain {
            lo: lo as i64,
            hi: hi as i64,
        },
    )
}

/// [`pack_int8_options`] on rows read again for each of the streamed calibration's passes
/// ([`crate::quantise::calibrate_stream`]): the same blob and statistics, without holding the
/// rows or their traced values. `Ok(None)` when the whole rows are needed: options that do not
/// [`streams`], or rows that drown the first layer's biases (whose error message the
/// whole-file pack gives, with the percentile that would clip them).
pub fn pack_int8_streamed(
    model: &FloatModel,
    passes: &dyn crate::quantise::calibrate_stream::Passes,
    opts: Int8Options,
    progress: &dyn Fn(u64),
) -> Result<Option<Int8Pack>> {
    if !streams(&opts) {
        return Ok(None);
    }
    let float_blob = pack_f32(model)?;
    let float_model = Model::parse(&float_blob)
        .map_err(|e| anyhow::anyhow!("internal: float pack rejected: {e}"))?;
    let streamed = crate::quantise::calibrate_stream::calibrate_streamed(
        &float_model,
        passes,
        opts.method,
        model.layers.first(),
        progress,
    )?;
    if streamed.biases_lost.is_some() {
        return Ok(None);
    }
    finish_int8(
        model,
        &float_model,
        streamed.calibration,
        None,
        (passes.source(), passes.rows()),
        opts,
    )
    .map(Some)
}

/// The int8 blob from a calibration on `rows` rows of `source`; `data` (the calibration rows)
/// for the raw-input trial.
fn finish_int8(
    model: &FloatModel,
    float_model: &Model<'_>,
    cal: Calibration,
    data: Option<&Dataset>,
    (source, rows): (&str, usize),
    opts: Int8Options,
) -> Result<Int8Pack> {
    let method = opts.method;
    let build = |m: &FloatModel, ranges: &[TensorRange], means: &[Vec<f64>]| -> Result<Vec<u8>> {
        let mut owned = if opts.bias_correction {
            let corrected = bias_corrected_bits(m, means, opts.weights)?;
            quantise_input(
                &corrected,
                ranges,
                &cal.pre_activation,
                opts.weights,
                opts.input,
            )?
        } else {
            quantise_input(m, ranges, &cal.pre_activation, opts.weights, opts.input)?
        };
        if !opts.sections.integer_input {
            owned.drop_integer_input();
        }
        if !opts.sections.weight_scales {
            owned.drop_weight_scales();
        }
        size::encode_within_limit(&owned)
    };
    let mut blob = build(model, &cal.ranges, &cal.means)?;
    let raw_input = match (opts.fold_scaler, data) {
        (FoldScaler::No, _) => None,
        (_, None) => bail!("internal: the raw-input trial needs the calibration rows"),
        (how, Some(data)) => {
            let (choice, folded) =
                raw_trial::try_folded(model, float_model, data, &cal, &blob, how, &build)?;
            if let Some(f) = folded {
                blob = f;
            }
            Some(choice)
        }
    };
    Ok(Int8Pack {
        blob,
        method,
        bias_correction: opts.bias_correction,
        raw_input,
        warnings: advice::warnings(&cal, source),
        ranges: cal.ranges,
        calibration_rows: rows,
        tensors: cal.tensors,
        wide_input: None,
    })
}

/// Refuses an input range that admits a row on which the float model loses every first-layer
/// bias ([`crate::quantise::plausible`]), naming the row and, when one exists, the percentile
/// that leaves it out.
fn check_plausible(model: &FloatModel, cal: &Calibration, source: &str) -> Result<()> {
    let (Some(first), Some(&range)) = (model.layers.first(), cal.ranges.first()) else {
        return Ok(());
    };
    let Some(lost) = biases_lost(first, &cal.scaled_input, range) else {
        return Ok(());
    };
    let clipped = suggested_percentile(&cal.tensors).filter(|&p| {
        let mut sorted = cal.scaled_input.clone();
        sorted.sort_by(f32::total_cmp);
        biases_lost(
            first,
            &cal.scaled_input,
            range_of(&sorted, RangeMethod::Percentile(p)),
        )
        .is_none()
    });
    let fix = match clipped {
        Some(p) if lost.rows == 1 => format!(
            "use {} to clip it, or drop the row",
            percentile_option(cal.method, p)
        ),
        Some(p) => format!(
            "use {} to clip them, or drop those rows",
            percentile_option(cal.method, p)
        ),
        None if lost.rows > 1 => {
            "check that the file holds raw features in the model's units".into()
        }
        None => "drop the row or check its units".into(),
    };
    let (rows, verb, its) = match lost.rows {
        1 => (rows_text(source, &[lost.row], 1), "is", "its"),
        n => (rows_text(source, &[lost.row], n), "are", "their"),
    };
    bail!(
        "{source}: {rows} {verb} beyond anything the model could have been trained on: {its} first-layer \
         input terms (|w·x| ≥ {}) drown every bias (|b| ≤ {}) below one f32 step; {fix}",
        num(lost.smallest_term),
        num(lost.largest_bias),
    )
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::graph::{Activation, DenseLayer, OutputKind, Scaler, ScalerKind};

    fn model(offset: Vec<f32>, scale: Vec<f32>) -> FloatModel {
        FloatModel {
            input_len: 2,
            scaler: Some(Scaler {
                kind: ScalerKind::Standardise,
                offset,
                scale,
            }),
            layers: vec![DenseLayer {
                inputs: 2,
                outputs: 1,
                weights: vec![1.0, 1.0],
                bias: vec![0.0],
                activation: Activation::Linear,
            }],
            output: OutputKind::Logits,
            labels: vec![],
        }
    }

    fn rows(features: Vec<f32>) -> Dataset {
        Dataset {
            rows: features.len() / 2,
            width: 2,
            features,
            labels: None,
            source: "rows.csv".into(),
        }
    }

    /// Whole numbers: every feature's scaled image of the pooled raw range. Feature 1 never
    /// reaches 16 in the rows, but feature 0 does, so feature 1's range goes to (16 − 1) · 4.
    #[test]
    fn whole_numbers_take_the_pooled_raw_domain() {
        let m = model(vec![2.0, 1.0], vec![0.5, 4.0]);
        let data = rows(vec![0.0, 1.0, 16.0, 2.0, 3.0, 1.0]);
        let calibrated = TensorRange {
            min: -1.0,
            max: 7.0,
        };
        let (r, how) = wide_input_range(&m, &data, calibrated);
        assert_eq!(how, WideRange::Domain { lo: 0, hi: 16 });
        // Feature 0: (0 − 2) · 0.5 = −1 .. 7; feature 1: (0 − 1) · 4 = −4 .. 60.
        assert_eq!((r.min, r.max), (-4.0, 60.0));
        let q = crate::quantise::int16_input_quant(r);
        assert_eq!(q.zero_point, 0);
        assert_eq!(q.scale, (60.0f64 / 32767.0) as f32);
    }

    /// Other rows: the calibrated range 16 times as wide.
    #[test]
    fn fractions_take_the_widened_calibrated_range() {
        let m = model(vec![0.0], vec![1.0]);
        let data = rows(vec![0.5, 1.0, 2.0, -1.25]);
        let calibrated = TensorRange {
            min: -1.25,
            max: 2.0,
        };
        let (r, how) = wide_input_range(&m, &data, calibrated);
        assert_eq!(how, WideRange::Widened);
        assert_eq!((r.min, r.max), (-20.0, 32.0));
        assert!(wide_input_line(r, how).contains("16 times as wide"));
    }
}
