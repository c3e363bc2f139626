//! `kinglet pack`: import, (calibrate and quantise,) pack, report.
use anyhow::{anyhow, bail, Context, Result};
use kinglet_converter::atomic::write_atomic;
use kinglet_converter::dataset::{load_file, DatasetError, LabelColumn, LoadOptions};
use kinglet_converter::import::import_file;
use kinglet_converter::import::plain::referenced_files;
use kinglet_converter::output_guard::{check_distinct, Named};
use kinglet_converter::pack::{pack_f32, pack_int8};
use kinglet_converter::quantise::calibrate::RangeMethod;
use kinglet_converter::report::calibration::{self, CalibrationReport};
use kinglet_converter::report::{table, BlobReport};
use kinglet_converter::scaler_file::{attach_scaler, load_scaler_file, uniform_divisor};
use kinglet_runtime::Model;
use std::path::{Path, PathBuf};

use super::Outcome;

/// How calibration ranges are taken.
#[derive(Debug, Clone, Copy, clap::ValueEnum)]
enum Range {
    /// Smallest and largest observed value.
    Minmax,
    /// Clip to the `--percentile` and its mirror.
    Percentile,
}

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
    /// Percentile for `--range percentile` (numpy's default linear rank; docs/calibration.md).
    #[arg(long, default_value_t = 99.99)]
    percentile: f64,
    /// A scaler saved separately (JSON: mean/std, min/max, or divide_by), when the model has none.
    #[arg(long, value_name = "FILE", conflicts_with = "divide_by")]
    scaler: Option<PathBuf>,
    /// A uniform scaler: every raw input is divided by this (e.g. 255 for pixels).
    #[arg(long, value_name = "N")]
    divide_by: Option<f32>,
    /// Class labels, comma-separated, when the model carries none.
    #[arg(long, value_delimiter = ',')]
    labels: Option<Vec<String>>,
    /// Print the report as JSON.
    #[arg(long)]
    json: bool,
}

fn default_out(model: &Path, float: bool) -> PathBuf {
    let stem = model
        .file_stem()
        .and_then(|s| s.to_str())
        .unwrap_or("model");
    PathBuf::from(format!("{stem}.{}.kgl", if float { "f32" } else { "int8" }))
}

pub fn run(a: Args) -> Result<Outcome> {
    let out = a
        .out
        .clone()
        .unwrap_or_else(|| default_out(&a.model, a.float));
    let mut inputs = vec![Named::new("the model", &a.model)];
    if let Some(p) = &a.calibration {
        inputs.push(Named::new("--calibration", p));
    }
    if let Some(p) = &a.scaler {
        inputs.push(Named::new("--scaler", p));
    }
    let weight_files = if a
        .model
        .extension()
        .is_some_and(|e| e.eq_ignore_ascii_case("json"))
    {
        referenced_files(&a.model)
    } else {
        Vec::new()
    };
    inputs.extend(
        weight_files
            .iter()
            .map(|p| Named::new("a weight file of the model", p)),
    );
    check_distinct(&[Named::new("the output (-o)", &out)], &inputs)?;
    let mut model =
        import_file(&a.model).with_context(|| format!("cannot import {}", a.model.display()))?;
    if let Some(p) = &a.scaler {
        attach_scaler(&mut model, load_scaler_file(p)?)
            .with_context(|| format!("--scaler {}", p.display()))?;
    } else if let Some(d) = a.divide_by {
        attach_scaler(&mut model, uniform_divisor(d)?)?;
    }
    if let Some(labels) = a.labels {
        if !model.labels.is_empty() {
            bail!("the model already carries class labels; drop --labels");
        }
        if let Some(i) = labels.iter().position(|l| l.trim().is_empty()) {
            bail!("--labels: label {} (0-based) is empty; give one non-empty name per class, comma-separated", i);
        }
        if labels.len() != model.classes() {
            bail!(
                "--labels gives {} labels for a model with {} classes",
                labels.len(),
                model.classes()
            );
        }
        model.labels = labels;
    }
    let mut notes = Vec::new();
    let mut calib = None;
    let blob = if a.float {
        if a.calibration.is_some() {
            bail!("--float packs f32 weights and needs no --calibration");
        }
        pack_f32(&model).with_context(|| format!("cannot pack {}", a.model.display()))?
    } else {
        let path = a.calibration.ok_or_else(|| {
            anyhow!("an int8 pack needs --calibration <rows.csv|rows.npy> (raw feature rows, a few hundred suffice), or use --float")
        })?;
        let data = load_file(
            &path,
            &LoadOptions {
                label: a.calibration_label,
                ..LoadOptions::default()
            },
        )
        .map_err(|e| match e {
            DatasetError::LabelColumnForNpy { .. } => {
                anyhow::Error::new(e).context("--calibration-label")
            }
            e => e.into(),
        })?;
        let method = match a.range {
            Range::Minmax => RangeMethod::MinMax,
            Range::Percentile => RangeMethod::Percentile(a.percentile),
        };
        let p = pack_int8(&model, &data, method)
            .with_context(|| format!("cannot pack {}", a.model.display()))?;
        notes.push(format!(
            "calibrated on {} rows of {} ({})",
            p.calibration_rows,
            path.display(),
            p.method
        ));
        calib = Some(CalibrationReport::of(&p));
        p.blob
    };
    // Parse what we are about to write with the runtime's own reader.
    let parsed = Model::parse(&blob).map_err(|e| anyhow!("internal: packed blob rejected: {e}"))?;
    let report = BlobReport::of(&parsed);
    write_atomic(&out, &blob)?;
    // Warnings go to stderr (seen also when stdout is JSON or piped), after the write succeeded.
    for w in calib.iter().flat_map(|c| &c.warnings) {
        eprintln!("kinglet: warning: {w}");
    }
    if a.json {
        let mut v = serde_json::to_value(&report)?;
        v["blob"] = serde_json::Value::String(out.display().to_string());
        v["notes"] = serde_json::to_value(&notes)?;
        if let Some(c) = &calib {
            v["calibration"] = serde_json::to_value(c)?;
        }
        super::out::line(&serde_json::to_string_pretty(&v)?)?;
    } else {
        super::out::line(&format!("wrote {} ({} bytes)", out.display(), blob.len()))?;
        for n in &notes {
            super::out::line(n)?;
        }
        if let Some(c) = &calib {
            super::out::emit(&calibration::render(c))?;
        }
        super::out::emit(&table::render(&report))?;
    }
    Ok(Outcome::Pass)
}
