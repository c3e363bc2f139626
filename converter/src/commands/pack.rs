//! `kinglet pack`: arguments into a [`PackRequest`], the library's `pack`, the blob written and
//! the report printed.
use anyhow::{anyhow, bail, Context, Result};
use kinglet_converter::atomic::write_atomic;
use kinglet_converter::dataset::LabelColumn;
use kinglet_converter::output_guard::{check_distinct, Named};
use kinglet_converter::pack::request::{
    named, pack_with, PackProgress, PackRequest, Precision, ScalerSource, TensorOptions,
};
use kinglet_converter::pack::Sections;
use kinglet_converter::quantise::calibrate::RangeMethod;
use kinglet_converter::quantise::weight_bits::LayerBits;
use kinglet_converter::report::calibration;
use kinglet_converter::report::table;
use kinglet_runtime::unstable::wire::format::InputWidth;
use std::path::PathBuf;

use super::Outcome;

/// Progress of a pack on the terminal: a spinner while a large calibration file is read, then
/// a bar over the calibration rows.
#[derive(Default)]
struct TerminalProgress {
    shown: std::sync::Mutex<Option<indicatif::ProgressBar>>,
}

impl TerminalProgress {
    fn show(&self, bar: indicatif::ProgressBar) {
        if let Ok(mut s) = self.shown.lock() {
            if let Some(old) = s.replace(bar) {
                old.finish_and_clear();
            }
        }
    }
}

impl PackProgress for TerminalProgress {
    fn loading(&self, path: &std::path::Path) {
        self.show(super::progress::loading(path));
    }
    fn calibrating(&self, rows: usize) {
        self.show(super::progress::rows_bar("calibrating", rows));
    }
    fn calibrating_passes(&self, rows: usize, passes: usize) {
        let what = format!("calibrating, {passes} passes of {rows} rows:");
        self.show(super::progress::rows_bar(
            &what,
            rows.saturating_mul(passes),
        ));
    }
    fn rows_done(&self, n: u64) {
        if let Ok(s) = self.shown.lock() {
            if let Some(b) = s.as_ref() {
                b.inc(n);
            }
        }
    }
}

impl Drop for TerminalProgress {
    fn drop(&mut self) {
        if let Ok(mut s) = self.shown.lock() {
            if let Some(b) = s.take() {
                b.finish_and_clear();
            }
        }
    }
}

/// How calibration ranges are taken.
#[derive(Debug, Clone, Copy, clap::ValueEnum)]
enum Range {
    /// Smallest and largest observed value.
    Minmax,
    /// Clip to the `--percentile` and its mirror.
    Percentile,
    /// Per tensor, the range with the smallest int8 quantisation error on the calibration
    /// rows (a grid search over clipping thresholds; docs/calibration.md).
    LeastError,
}

/// The input tensor's type (`--input-tensor`).
#[derive(Debug, Clone, Copy, clap::ValueEnum)]
enum InputTensor {
    /// int8 with a zero point: every reader.
    Int8,
    /// int16, symmetric, over the input's whole domain (format version 7): for inputs whose
    /// rare values lie far beyond the common ones (docs/calibration.md).
    Int16,
}

/// `pack --json`: the written file, then the blob's report in `inspect --json`'s order and
/// number forms (serialised directly: a `serde_json::Value` would sort the keys and widen every
/// f32 to f64 digits), then the notes and the calibration.
#[derive(serde::Serialize)]
struct PackJson<'a> {
    blob: String,
    #[serde(flatten)]
    report: &'a kinglet_converter::report::BlobReport,
    notes: &'a [String],
    #[serde(skip_serializing_if = "Option::is_none")]
    calibration: Option<&'a kinglet_converter::report::calibration::CalibrationReport>,
}

/// `--flash-budget`: bytes or `K`/`M` suffixes, in the size grammar of `kinglet budget` (a
/// bare number is bytes here, however small: a blob can be a few hundred).
fn flash_size(s: &str) -> Result<u64, String> {
    kinglet_sizes::parse(s, kinglet_converter::fit::MAX_BYTES)
        .map(|z| z.bytes)
        .map_err(|e| e.to_string())
}

/// What `--max-drop` is compared with.
#[derive(Debug, Clone, Copy, clap::ValueEnum)]
enum GateArg {
    /// The measured accuracy drop.
    Estimate,
    /// The upper limit of the drop's 95% interval (stricter).
    Upper,
}

/// `--percentile` when `--range percentile` is given without it.
const DEFAULT_PERCENTILE: f64 = 99.99;

/// Arguments of `kinglet pack`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The trained model: `.onnx`, or a `.json` plain model description.
    model: PathBuf,
    /// Where to write the blob [default: the model name + `.int8.kgl` or `.f32.kgl`, in the current directory].
    #[arg(short, long)]
    out: Option<PathBuf>,
    /// Keep f32 weights (for boards with an FPU, and as the float reference); no calibration.
    #[arg(long)]
    float: bool,
    /// Raw feature rows for int8 calibration: CSV, or `.npy` (rows × features).
    #[arg(long, value_name = "FILE")]
    calibration: Option<PathBuf>,
    /// A label column in the calibration CSV to leave out (name or 0-based index).
    #[arg(long, value_name = "COLUMN")]
    calibration_label: Option<LabelColumn>,
    /// How each tensor's range is taken from the calibration rows.
    #[arg(long, value_enum, default_value = "minmax")]
    range: Range,
    /// Percentile for `--range percentile` (numpy's default linear rank; docs/calibration.md)
    /// [default: 99.99].
    #[arg(long, value_name = "P")]
    percentile: Option<f64>,
    /// Correct every layer's bias for the mean error its int8 weights cause on the calibration
    /// rows (Nagel et al., 2019; docs/calibration.md).
    #[arg(long)]
    correct_bias: bool,
    /// When the model has a scaler and the calibration rows are small whole numbers (pixels,
    /// counts), also try the raw input quantised exactly with the scaler folded into the first
    /// layer, and keep whichever is closer to the float model on the calibration rows.
    #[arg(long)]
    fold_scaler: bool,
    /// The input tensor's type: `int8`, or `int16` over the input's whole domain (a
    /// format-version-7 blob; twice the input's scratch RAM; layer 1 keeps int8 weights).
    #[arg(long, value_enum, default_value = "int8")]
    input_tensor: InputTensor,
    /// Widen every layer output's calibrated range this many times (e.g. 2), for held-out
    /// values beyond any calibration row; 1 keeps the ranges.
    #[arg(long, value_name = "FACTOR", default_value_t = 1.0)]
    headroom: f64,
    /// A scaler saved separately (JSON: mean/std, min/max, or divide_by), when the model has none.
    #[arg(long, value_name = "FILE", conflicts_with = "divide_by")]
    scaler: Option<PathBuf>,
    /// A uniform scaler: every raw input is divided by this (e.g. 255 for pixels).
    #[arg(long, value_name = "N")]
    divide_by: Option<f32>,
    /// Class labels, comma-separated, one per class: names for the report and the firmware.
    /// They replace the labels the model carries (scikit-learn writes "0", "1", …), with a note.
    #[arg(long, value_delimiter = ',')]
    labels: Option<Vec<String>>,
    /// Keep the integer input path (int8; 13 bytes per feature): needed to feed raw i16/u8
    /// samples (`Input::I16`/`Input::U8`, `--feed i16|u8`). Without it the blob takes f32
    /// features only.
    #[arg(long)]
    integer_input: bool,
    /// Keep the per-channel f32 weight scales (int8; 4 bytes per layer output), which inference
    /// does not use.
    #[arg(long)]
    weight_scales: bool,
    /// Weight precision (int8 models): `int8` (the default), `int4` for every layer (two
    /// weights per byte; a format-version-6 blob), per layer, e.g. `0:int4,1:int8` (layers
    /// not named stay int8), or `auto`: the smallest blob whose accuracy on the --holdout
    /// rows stays within the bound (--max-drop / --min-agreement; default a 1 pp drop, or 99 %
    /// agreement for rows without labels). Activations stay int8.
    #[arg(long, value_name = "PRECISION")]
    weights: Option<String>,
    /// `--weights auto`: held-out rows to judge each candidate on (CSV or `.npy`), not the
    /// calibration rows.
    #[arg(long, value_name = "FILE")]
    holdout: Option<PathBuf>,
    /// `--weights auto`: the label column of the --holdout CSV (name or 0-based index).
    #[arg(long, value_name = "COLUMN", requires = "holdout")]
    holdout_label: Option<LabelColumn>,
    /// `--weights auto`: labels for `.npy` --holdout features (a 1-D `.npy` array).
    #[arg(long, value_name = "FILE", requires = "holdout")]
    holdout_label_file: Option<PathBuf>,
    /// `--weights auto`: largest accuracy drop (float minus int8) allowed, percentage points.
    #[arg(long, value_name = "PP", requires = "holdout")]
    max_drop: Option<f64>,
    /// `--weights auto`: what --max-drop is compared with: the measured drop, or the upper
    /// limit of its 95% interval (as `vet --gate`).
    #[arg(long, value_enum, default_value = "estimate", requires = "max_drop")]
    gate: GateArg,
    /// `--weights auto`: smallest agreement with the float model allowed, percent of rows.
    #[arg(long, value_name = "PERCENT", requires = "holdout")]
    min_agreement: Option<f64>,
    /// `--weights auto`: largest blob the board's flash takes: bytes, or with a K or M suffix
    /// (e.g. 48K).
    #[arg(long, value_name = "SIZE", requires = "holdout", value_parser = flash_size)]
    flash_budget: Option<u64>,
    /// Print the report as JSON.
    #[arg(long)]
    json: bool,
}

impl Args {
    /// The `--weights auto` options.
    fn search_args(&self) -> super::pack_search::SearchArgs {
        super::pack_search::SearchArgs {
            holdout: self.holdout.clone(),
            holdout_label: self.holdout_label.clone(),
            holdout_label_file: self.holdout_label_file.clone(),
            max_drop: self.max_drop,
            upper: matches!(self.gate, GateArg::Upper),
            min_agreement: self.min_agreement,
            flash_budget: self.flash_budget,
        }
    }
}

/// `--input-tensor` and `--headroom`, checked against the options they cannot go with.
fn tensor_options(a: &Args) -> Result<TensorOptions> {
    let input = match a.input_tensor {
        InputTensor::Int8 => InputWidth::I8,
        InputTensor::Int16 => InputWidth::I16,
    };
    if !(a.headroom.is_finite() && a.headroom >= 1.0) {
        bail!(
            "--headroom must be a number ≥ 1 (1 keeps the calibrated ranges), got {}",
            a.headroom
        );
    }
    let custom = input == InputWidth::I16 || a.headroom != 1.0;
    if input == InputWidth::I16 && a.fold_scaler {
        bail!("--fold-scaler quantises the raw input to int8 and --input-tensor int16 keeps the scaler with an int16 input; drop one of them");
    }
    if custom && a.weights.as_deref() == Some("auto") {
        bail!("--weights auto searches int8-input packs without headroom; drop --input-tensor int16 / --headroom, or pick the weights yourself");
    }
    Ok(TensorOptions {
        input,
        headroom: a.headroom,
    })
}

pub fn run(a: Args) -> Result<Outcome> {
    let scaler = match (&a.scaler, a.divide_by) {
        (Some(p), _) => Some(ScalerSource::File(p.clone())),
        (None, Some(d)) => Some(ScalerSource::DivideBy(d)),
        (None, None) => None,
    };
    if a.percentile.is_some() && !matches!(a.range, Range::Percentile) {
        let method = match a.range {
            Range::LeastError => "least-error",
            _ => "minmax",
        };
        bail!("--percentile applies to --range percentile only (the range method is {method}); add --range percentile");
    }
    let precision = if a.float {
        if a.calibration.is_some() {
            bail!("--float packs f32 weights and needs no --calibration");
        }
        if a.correct_bias {
            bail!("--correct-bias corrects for int8 weight rounding and --float keeps f32 weights; drop one of them");
        }
        if a.fold_scaler {
            bail!("--fold-scaler chooses the int8 input and --float keeps f32 inputs; drop one of them");
        }
        if a.weights.is_some() {
            bail!("--weights chooses int8 or int4 weights and --float keeps f32 weights; drop one of them");
        }
        Precision::F32
    } else {
        let calibration = a.calibration.clone().ok_or_else(|| {
            anyhow!("an int8 pack needs --calibration <rows.csv|rows.npy> (raw feature rows, a few hundred suffice), or use --float")
        })?;
        Precision::Int8 {
            calibration,
            label: a.calibration_label.clone(),
            method: match a.range {
                Range::Minmax => RangeMethod::MinMax,
                Range::LeastError => RangeMethod::LeastError,
                Range::Percentile => {
                    RangeMethod::Percentile(a.percentile.unwrap_or(DEFAULT_PERCENTILE))
                }
            },
            bias_correction: a.correct_bias,
            weights: match a.weights.as_deref() {
                Some("auto") | None => LayerBits::default(),
                Some(s) => LayerBits::parse(s).context("--weights")?,
            },
            fold_scaler: a.fold_scaler,
            tensors: tensor_options(&a)?,
        }
    };
    let req = PackRequest {
        model: a.model.clone(),
        scaler,
        labels: a.labels.clone(),
        precision,
        sections: Sections {
            integer_input: a.integer_input,
            weight_scales: a.weight_scales,
        },
    };
    let out = a.out.clone().unwrap_or_else(|| req.default_out());
    let mut inputs = req.inputs();
    if let Some(h) = &a.holdout {
        inputs.push(("--holdout".into(), h.clone()));
    }
    if let Some(h) = &a.holdout_label_file {
        inputs.push(("--holdout-label-file".into(), h.clone()));
    }
    check_distinct(&[Named::new("the output (-o)", &out)], &named(&inputs))?;
    if a.weights.as_deref() == Some("auto") {
        return super::pack_search::run(&a.search_args(), &req, &out, a.json);
    }
    if a.holdout.is_some() {
        bail!("--holdout is for --weights auto (the rows each candidate is judged on); add --weights auto, or use `kinglet vet` to judge one blob");
    }
    let packed = pack_with(&req, &TerminalProgress::default())?;
    write_atomic(&out, &packed.blob)?;
    // Warnings go to stderr (seen also when stdout is JSON or piped), after the write succeeded.
    for w in packed.calibration.iter().flat_map(|c| &c.warnings) {
        eprintln!("kinglet: warning: {w}");
    }
    if a.json {
        let v = PackJson {
            blob: out.display().to_string(),
            report: &packed.report,
            notes: &packed.notes,
            calibration: packed.calibration.as_ref(),
        };
        super::out::line(&serde_json::to_string_pretty(&v)?)?;
    } else {
        super::out::line(&format!(
            "wrote {} ({} bytes)",
            out.display(),
            packed.blob.len()
        ))?;
        for n in &packed.notes {
            super::out::line(n)?;
        }
        if let Some(c) = &packed.calibration {
            super::out::emit(&calibration::render(c))?;
        }
        super::out::emit(&table::render(&packed.report))?;
    }
    Ok(Outcome::Pass)
}
