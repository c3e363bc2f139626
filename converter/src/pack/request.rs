//! The whole of `kinglet pack` as one library call: import the model, attach a scaler and
//! class labels, calibrate and quantise (or keep f32), and report. The CLI only turns its
//! arguments into a [`PackRequest`] and prints the [`Packed`] result.
use anyhow::{anyhow, bail, Context, Result};
use kinglet_runtime::Model;
use std::path::{Path, PathBuf};

use crate::dataset::{load_file, DatasetError, LabelColumn, LoadOptions};
use crate::import::import_file;
use crate::import::plain::referenced_files;
use crate::output_guard::Named;
use crate::quantise::calibrate::RangeMethod;
use crate::quantise::calibrate_stream::{FilePasses, Passes, CHUNK_ROWS, PASSES};
use crate::report::calibration::CalibrationReport;
use crate::report::BlobReport;
use crate::scaler_file::{attach_scaler, load_scaler_file, uniform_divisor};

use super::{pack_f32, pack_int8_options, FoldScaler, Int8Options, Sections};

/// Where the input scaler comes from, when the model carries none.
#[derive(Debug, Clone, PartialEq)]
pub enum ScalerSource {
    /// A scaler saved as JSON (mean/std, min/max, divide_by, factor/offset).
    File(PathBuf),
    /// Every raw input divided by this number (255 for pixels).
    DivideBy(f32),
}

/// The weights to write.
#[derive(Debug, Clone, PartialEq)]
pub enum Precision {
    /// f32 weights, no calibration.
    F32,
    /// int8, calibrated on raw feature rows.
    Int8 {
        /// The rows: CSV or `.npy`.
        calibration: PathBuf,
        /// A CSV label column to leave out.
        label: Option<LabelColumn>,
        /// How each tensor's range is taken.
        method: RangeMethod,
        /// Correct the biases for the int8 weight rounding (`--correct-bias`).
        bias_correction: bool,
        /// The weight precision of each layer (`--weights`).
        weights: crate::quantise::weight_bits::LayerBits,
        /// Also try the raw integer input with the scaler folded in; keep the better
        /// (`--fold-scaler`).
        fold_scaler: bool,
        /// The input tensor's type and the layer outputs' headroom (`--input-tensor`,
        /// `--headroom`).
        tensors: TensorOptions,
    },
}

/// The input tensor's type and how much room the layer outputs' ranges get beyond the
/// calibration rows.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TensorOptions {
    /// int8 (the default) or int16 (`--input-tensor int16`, format version 7).
    pub input: kinglet_runtime::unstable::wire::format::InputWidth,
    /// Every layer output's range widened this many times (`--headroom`, default 1).
    pub headroom: f64,
}

impl Default for TensorOptions {
    fn default() -> Self {
        TensorOptions {
            input: kinglet_runtime::unstable::wire::format::InputWidth::I8,
            headroom: 1.0,
        }
    }
}

/// Everything `pack` needs to know.
#[derive(Debug, Clone, PartialEq)]
pub struct PackRequest {
    /// The trained model: `.onnx` or a `.json` plain model description.
    pub model: PathBuf,
    /// A scaler to attach (the model must have none).
    pub scaler: Option<ScalerSource>,
    /// Class labels to store (the model must carry none).
    pub labels: Option<Vec<String>>,
    /// f32 or int8.
    pub precision: Precision,
    /// The optional sections of an int8 blob to keep (`--integer-input`, `--weight-scales`);
    /// an f32 pack has none and refuses either.
    pub sections: super::Sections,
}

/// A packed blob and what to tell about it.
#[derive(Debug, Clone)]
pub struct Packed {
    /// The blob's bytes, already accepted by the runtime's reader.
    pub blob: Vec<u8>,
    /// What the blob holds.
    pub report: BlobReport,
    /// Lines for the user ("calibrated on … rows of …").
    pub notes: Vec<String>,
    /// What calibration saw (int8 only), with its warnings.
    pub calibration: Option<CalibrationReport>,
}

impl PackRequest {
    /// Every file the pack reads, named as the user named it: an output must be none of them.
    pub fn inputs(&self) -> Vec<(String, PathBuf)> {
        let mut v = vec![("the model".to_string(), self.model.clone())];
        if self
            .model
            .extension()
            .is_some_and(|e| e.eq_ignore_ascii_case("json"))
        {
            v.extend(
                referenced_files(&self.model)
                    .into_iter()
                    .map(|p| ("a weight file of the model".to_string(), p)),
            );
        }
        if let Precision::Int8 { calibration, .. } = &self.precision {
            v.push(("--calibration".into(), calibration.clone()));
        }
        if let Some(ScalerSource::File(p)) = &self.scaler {
            v.push(("--scaler".into(), p.clone()));
        }
        v
    }

    /// The calibration options of an int8 pack of this request.
    pub fn int8_options(
        &self,
        method: RangeMethod,
        bias_correction: bool,
        fold_scaler: bool,
        weights: crate::quantise::weight_bits::LayerBits,
    ) -> Int8Options {
        Int8Options {
            method,
            bias_correction,
            fold_scaler: if fold_scaler {
                FoldScaler::Try
            } else {
                FoldScaler::No
            },
            sections: self.sections,
            weights,
            input: kinglet_runtime::unstable::wire::format::InputWidth::I8,
            headroom: 1.0,
        }
    }

    /// The default output name: the model's stem + `.int8.kgl` or `.f32.kgl`, here.
    pub fn default_out(&self) -> PathBuf {
        let stem = self
            .model
            .file_stem()
            .and_then(|s| s.to_str())
            .unwrap_or("model");
        let kind = match self.precision {
            Precision::F32 => "f32",
            Precision::Int8 { .. } => "int8",
        };
        PathBuf::from(format!("{stem}.{kind}.kgl"))
    }
}

/// Borrowed [`Named`] views of [`PackRequest::inputs`], for [`crate::output_guard`].
pub fn named(inputs: &[(String, PathBuf)]) -> Vec<Named<'_>> {
    inputs.iter().map(|(what, p)| Named::new(what, p)).collect()
}

fn check_labels(labels: &[String], classes: usize) -> Result<()> {
    if let Some(i) = labels.iter().position(|l| l.trim().is_empty()) {
        bail!("--labels: label {i} (0-based) is empty; give one non-empty name per class, comma-separated");
    }
    if labels.len() != classes {
        bail!(
            "--labels gives {} labels for a model with {classes} classes",
            labels.len()
        );
    }
    Ok(())
}

/// The first few labels, for a note.
fn shown_labels(labels: &[String]) -> String {
    const SHOWN: usize = 6;
    let mut s = labels
        .iter()
        .take(SHOWN)
        .map(|l| crate::echo::quoted(l))
        .collect::<Vec<_>>()
        .join(", ");
    if labels.len() > SHOWN {
        s.push_str(&format!(", … ({} in all)", labels.len()));
    }
    s
}

/// What a long pack reports as it goes (every method does nothing by default).
pub trait PackProgress {
    /// The calibration rows at `path` are being read.
    fn loading(&self, _path: &Path) {}
    /// Calibration over `rows` rows starts.
    fn calibrating(&self, _rows: usize) {}
    /// Calibration over `rows` rows read `passes` times starts (the streamed calibration);
    /// by default [`PackProgress::calibrating`] over every row of every pass.
    fn calibrating_passes(&self, rows: usize, passes: usize) {
        self.calibrating(rows.saturating_mul(passes));
    }
    /// `n` more calibration rows have been run.
    fn rows_done(&self, _n: u64) {}
}

/// Reports nothing.
#[derive(Debug, Clone, Copy, Default)]
pub struct Quiet;

impl PackProgress for Quiet {}

/// Runs the pack `req` describes; writes nothing.
///
/// # Errors
/// Whatever the import, the scaler, the labels, the calibration rows or the quantiser refuse,
/// each naming the file (and row, column, node or layer) at fault.
pub fn pack(req: &PackRequest) -> Result<Packed> {
    pack_with(req, &Quiet)
}

/// [`pack`], telling `progress` how loading and calibration go.
pub fn pack_with(req: &PackRequest, progress: &dyn PackProgress) -> Result<Packed> {
    let model_path = &req.model;
    let (model, mut notes) = prepare(req)?;
    let mut calibration = None;
    let blob = match &req.precision {
        Precision::F32 => {
            refuse_sections_on_f32(req.sections)?;
            pack_f32(&model).with_context(|| format!("cannot pack {}", model_path.display()))?
        }
        Precision::Int8 {
            calibration: rows,
            label,
            method,
            bias_correction,
            fold_scaler,
            weights,
            tensors,
        } => {
            let opts = Int8Options {
                input: tensors.input,
                headroom: tensors.headroom,
                ..req.int8_options(*method, *bias_correction, *fold_scaler, *weights)
            };
            let p = match streamed(&model, model_path, rows, label, opts, progress)? {
                Some(p) => p,
                None => {
                    progress.loading(rows);
                    let data = load_rows(rows, label.clone())?;
                    check_calibration_width(
                        &data.source,
                        data.width,
                        model.input_len,
                        label.is_some(),
                    )?;
                    progress.calibrating(data.rows);
                    pack_int8_options(&model, &data, opts, &|n| progress.rows_done(n))
                        .with_context(|| format!("cannot pack {}", model_path.display()))?
                }
            };
            notes.push(format!(
                "calibrated on {} rows of {} ({}{})",
                p.calibration_rows,
                rows.display(),
                p.method,
                if p.bias_correction {
                    ", biases corrected for the int8 weight rounding"
                } else {
                    ""
                }
            ));
            if let Some(line) = int4_note(weights, model.layers.len()) {
                notes.push(line);
            }
            if let Some(c) = &p.raw_input {
                notes.push(crate::report::calibration::raw_input_line(c));
            }
            if let Some((range, how)) = p.wide_input {
                notes.push(super::wide_input_line(range, how));
            }
            if tensors.headroom != 1.0 {
                notes.push(format!(
                    "headroom: every layer output's range is the calibrated one widened {} times",
                    crate::quantise::advice::num(tensors.headroom)
                ));
            }
            calibration = Some(CalibrationReport::new(
                p.method,
                p.bias_correction,
                p.raw_input.clone(),
                p.calibration_rows,
                p.tensors,
                p.warnings,
            ));
            p.blob
        }
    };
    // Parse what is about to be written with the runtime's own reader.
    let report = {
        let parsed =
            Model::parse(&blob).map_err(|e| anyhow!("internal: packed blob rejected: {e}"))?;
        BlobReport::of(&parsed)
    };
    if let Precision::Int8 { .. } = req.precision {
        notes.push(sections_note(req.sections, &blob)?);
    }
    if model.output == crate::graph::OutputKind::Logits {
        notes.push(
            "scores are raw scores (logits, or decision-function values of a linear SVM): no probabilities; the class is the largest".into(),
        );
    }
    Ok(Packed {
        blob,
        report,
        notes,
        calibration,
    })
}

/// The request's model imported, with its scaler and class labels attached, and the notes to
/// print about them.
pub fn prepare(req: &PackRequest) -> Result<(crate::graph::FloatModel, Vec<String>)> {
    let model_path = &req.model;
    let mut model = import_file(model_path)
        .with_context(|| format!("cannot import {}", model_path.display()))?;
    match &req.scaler {
        Some(ScalerSource::File(p)) => attach_scaler(&mut model, load_scaler_file(p)?)
            .with_context(|| format!("--scaler {}", p.display()))?,
        Some(ScalerSource::DivideBy(d)) => attach_scaler(&mut model, uniform_divisor(*d)?)?,
        None => {}
    }
    let mut notes = Vec::new();
    if let Some(labels) = &req.labels {
        check_labels(labels, model.classes())?;
        if !model.labels.is_empty() && model.labels != *labels {
            notes.push(format!(
                "--labels replaces the model's own class labels ({})",
                shown_labels(&model.labels)
            ));
        }
        model.labels = labels.clone();
    }
    Ok((model, notes))
}

/// The calibration rows of `path` held whole, checked against the model's input width.
pub fn calibration_rows(
    path: &Path,
    label: Option<LabelColumn>,
    inputs: usize,
) -> Result<crate::dataset::Dataset> {
    let labelled = label.is_some();
    let data = load_rows(path, label)?;
    check_calibration_width(&data.source, data.width, inputs, labelled)?;
    Ok(data)
}

/// `--integer-input` and `--weight-scales` are int8 sections: an f32 blob takes integer inputs
/// through its float scaler and has no weight scales.
fn refuse_sections_on_f32(s: Sections) -> Result<()> {
    if s.integer_input {
        bail!("--integer-input applies to int8 packs: an f32 blob takes i16/u8 inputs through its float scaler as it is");
    }
    if s.weight_scales {
        bail!("--weight-scales applies to int8 packs: an f32 blob has no weight scales");
    }
    Ok(())
}

/// The note on the optional sections of an int8 pack: whether the blob takes raw integer
/// samples, and what each section costs or saves.
fn sections_note(s: Sections, blob: &[u8]) -> Result<String> {
    let m = Model::parse(blob).map_err(|e| anyhow!("internal: packed blob rejected: {e}"))?;
    let features = m.desc().scaler.map_or(1, |sc| (sc.offset.len() / 4).max(1));
    let integer_bytes = 13 * features;
    let outputs: usize = m.layers().map(|l| l.desc.outputs as usize).sum();
    let scale_bytes = 4 * outputs;
    let integer = if s.integer_input {
        format!("integer input path kept ({integer_bytes} bytes): the blob takes f32 features and raw i16/u8 samples")
    } else {
        format!("no integer input path: the blob takes f32 features only (Input::F32, --feed f32); to feed raw i16/u8 samples, pack with --integer-input (+{integer_bytes} bytes)")
    };
    let scales = if s.weight_scales {
        format!("weight scales kept ({scale_bytes} bytes, not used by inference)")
    } else {
        format!("weight scales left out (-{scale_bytes} bytes; --weight-scales keeps them)")
    };
    Ok(format!("{integer}; {scales}"))
}

fn load_rows(path: &Path, label: Option<LabelColumn>) -> Result<crate::dataset::Dataset> {
    let labelled = label.is_some();
    load_file(
        path,
        &LoadOptions {
            label,
            ..LoadOptions::default()
        },
    )
    .map_err(|e| rows_error(e, labelled))
}

/// A calibration file's error, with the option that fixes it when there is one.
fn rows_error(e: DatasetError, labelled: bool) -> anyhow::Error {
    match e {
        DatasetError::LabelColumnForNpy { .. } => {
            anyhow::Error::new(e).context("--calibration-label")
        }
        DatasetError::NonNumeric { ref column, .. } if !labelled => {
            let hint = label_hint(column);
            anyhow::anyhow!("{e}; {hint}")
        }
        e => e.into(),
    }
}

/// How to leave a label column out, for the column `column` as a message names it
/// (`'name'` or `index N`).
fn label_hint(column: &str) -> String {
    let arg = column
        .strip_prefix("index ")
        .map(str::to_owned)
        .unwrap_or_else(|| column.trim_matches('\'').to_owned());
    format!(
        "if that column holds class labels, leave it out with --calibration-label {}",
        crate::echo::text(&arg)
    )
}

/// One column more than the model takes, with no label column named: most likely the label.
fn check_calibration_width(source: &str, width: usize, inputs: usize, label: bool) -> Result<()> {
    if !label && width == inputs + 1 {
        bail!(
            "{source}: {width} features per row, but the model takes {inputs} inputs; if one column holds \
             class labels, leave it out with --calibration-label <name or index>"
        );
    }
    Ok(())
}

/// The report's note naming the layers packed with int4 weights, if any: numbered from 1 as
/// the report's layer table, with the 0-based indices `--weights` takes.
fn int4_note(bits: &crate::quantise::weight_bits::LayerBits, layers: usize) -> Option<String> {
    let int4: Vec<usize> = (0..layers)
        .filter(|&k| bits.get(k) == crate::quantise::weight_bits::WeightBits::Int4)
        .collect();
    let list = |v: &mut dyn Iterator<Item = usize>| {
        v.map(|k| k.to_string()).collect::<Vec<_>>().join(", ")
    };
    let (s, one) = if int4.len() == 1 {
        ("", "index")
    } else {
        ("s", "indices")
    };
    (!int4.is_empty()).then(|| {
        format!(
            "int4 weights on layer{s} {} (--weights {one} {}): two per byte, symmetric per channel in [-7, 7]; format version 6",
            list(&mut int4.iter().map(|k| k + 1)),
            list(&mut int4.iter().copied()),
        )
    })
}

/// The int8 pack calibrated on a C-order `.npy` or a CSV file read a chunk at a time on each
/// pass ([`super::pack_int8_streamed`]); `None` when the rows are to be loaded whole instead (a
/// Fortran-order array, options that need every row, or rows the bias check refuses).
fn streamed(
    model: &crate::graph::FloatModel,
    model_path: &Path,
    rows: &Path,
    label: &Option<LabelColumn>,
    opts: Int8Options,
    progress: &dyn PackProgress,
) -> Result<Option<super::Int8Pack>> {
    if !super::streams(&opts) {
        return Ok(None);
    }
    progress.loading(rows);
    let load = LoadOptions {
        label: label.clone(),
        ..LoadOptions::default()
    };
    let Some(passes) =
        FilePasses::open(rows, &load, CHUNK_ROWS).map_err(|e| rows_error(e, label.is_some()))?
    else {
        return Ok(None);
    };
    check_calibration_width(
        passes.source(),
        passes.width(),
        model.input_len,
        label.is_some(),
    )?;
    progress.calibrating_passes(passes.rows(), PASSES);
    // A bad value read on a pass is the file's error, as when the file is loaded first.
    super::pack_int8_streamed(model, &passes, opts, &|n| progress.rows_done(n)).map_err(|e| {
        if e.downcast_ref::<DatasetError>().is_some() {
            e
        } else {
            e.context(format!("cannot pack {}", model_path.display()))
        }
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn example(rel: &str) -> PathBuf {
        Path::new(env!("CARGO_MANIFEST_DIR"))
            .join("../examples")
            .join(rel)
    }

    #[derive(Default)]
    struct Recorded {
        loaded: std::cell::Cell<bool>,
        passes: std::cell::Cell<(usize, usize)>,
        done: std::cell::Cell<u64>,
    }

    impl PackProgress for Recorded {
        fn loading(&self, _path: &Path) {
            self.loaded.set(true);
        }
        fn calibrating_passes(&self, rows: usize, passes: usize) {
            self.passes.set((rows, passes));
        }
        fn rows_done(&self, n: u64) {
            self.done.set(self.done.get() + n);
        }
    }

    #[test]
    fn npy_rows_stream_through_the_passes_and_pack_as_the_csv_does() {
        let csv = example("vibration/calibration.csv");
        let data = crate::dataset::load_csv(&csv, &crate::dataset::CsvOptions::default()).unwrap();
        let dir = tempfile::tempdir().unwrap();
        let npy = dir.path().join("rows.npy");
        let mut bytes = Vec::new();
        {
            use npyz::WriterBuilder;
            let mut w = npyz::WriteOptions::<f32>::new()
                .default_dtype()
                .shape(&[data.rows as u64, data.width as u64])
                .writer(&mut bytes)
                .begin_nd()
                .unwrap();
            w.extend(data.features.iter().copied()).unwrap();
            w.finish().unwrap();
        }
        std::fs::write(&npy, bytes).unwrap();
        let req = |calibration: PathBuf, method| PackRequest {
            model: example("vibration/model.onnx"),
            scaler: None,
            labels: None,
            precision: Precision::Int8 {
                calibration,
                label: None,
                method,
                bias_correction: true,
                fold_scaler: false,
                tensors: TensorOptions::default(),
                weights: Default::default(),
            },
            sections: Sections::default(),
        };
        for method in [RangeMethod::MinMax, RangeMethod::Percentile(99.0)] {
            let whole = pack(&req(csv.clone(), method)).unwrap();
            let progress = Recorded::default();
            let streamed = pack_with(&req(npy.clone(), method), &progress).unwrap();
            assert_eq!(streamed.blob, whole.blob);
            assert!(progress.loaded.get());
            assert_eq!(progress.passes.get(), (data.rows, PASSES));
            assert_eq!(progress.done.get(), (PASSES * data.rows) as u64);
        }
        // The CSV streams too (the same passes); the least-error range loads the rows whole.
        let progress = Recorded::default();
        let streamed = pack_with(&req(csv.clone(), RangeMethod::MinMax), &progress).unwrap();
        assert_eq!(progress.done.get(), (PASSES * data.rows) as u64);
        assert_eq!(
            streamed.blob,
            pack(&req(npy.clone(), RangeMethod::MinMax)).unwrap().blob
        );
        let progress = Recorded::default();
        pack_with(&req(npy, RangeMethod::LeastError), &progress).unwrap();
        assert!(progress.loaded.get());
        assert_eq!(progress.done.get(), data.rows as u64);
    }

    #[test]
    fn packs_the_vibration_example_both_ways() {
        let f32 = pack(&PackRequest {
            model: example("vibration/model.onnx"),
            scaler: None,
            labels: None,
            precision: Precision::F32,
            sections: Sections::default(),
        })
        .unwrap();
        assert!(f32.calibration.is_none() && f32.notes.is_empty());
        let req = PackRequest {
            model: example("vibration/model.onnx"),
            scaler: None,
            labels: None,
            precision: Precision::Int8 {
                calibration: example("vibration/calibration.csv"),
                label: None,
                method: RangeMethod::MinMax,
                bias_correction: false,
                weights: Default::default(),
                fold_scaler: false,
                tensors: TensorOptions::default(),
            },
            sections: Sections::default(),
        };
        let int8 = pack(&req).unwrap();
        assert!(int8.blob.len() < f32.blob.len());
        assert!(
            int8.notes[0].starts_with("calibrated on "),
            "{:?}",
            int8.notes
        );
        assert!(int8.calibration.is_some());
        // The lean default says that raw integer samples need --integer-input (15 features).
        assert!(
            int8.notes[1].starts_with("no integer input path: the blob takes f32 features only")
                && int8.notes[1].contains("pack with --integer-input (+195 bytes)"),
            "{:?}",
            int8.notes
        );
        let m = Model::parse(&int8.blob).unwrap();
        assert!(!m.takes_integer_input() && !m.has_weight_scales());
        let full = pack(&PackRequest {
            sections: Sections::ALL,
            ..req.clone()
        })
        .unwrap();
        let m = Model::parse(&full.blob).unwrap();
        assert!(m.takes_integer_input() && m.has_weight_scales());
        // 15 features × 13 bytes, and (24 + 12 + 4) outputs × 4 bytes of weight scales; the
        // alignment bytes before each layer's weights (0 to 3, three layers) move with them.
        let saved = full.blob.len() - int8.blob.len();
        assert!(saved.abs_diff(15 * 13 + 40 * 4) <= 3 * 3, "{saved}");
        assert!(full.notes[1].starts_with("integer input path kept (195 bytes)"));
        let e = pack(&PackRequest {
            precision: Precision::F32,
            sections: Sections::INTEGER_INPUT,
            ..req.clone()
        })
        .unwrap_err();
        assert!(
            e.to_string()
                .starts_with("--integer-input applies to int8 packs"),
            "{e}"
        );
        assert_eq!(req.default_out(), PathBuf::from("model.int8.kgl"));
        let inputs = req.inputs();
        assert_eq!(inputs.len(), 2);
        assert_eq!(inputs[1].0, "--calibration");
    }

    #[test]
    fn labels_replace_the_models_own_with_a_note() {
        // Was: refused for every scikit-learn model, which always carries "0", "1", ...
        let names: Vec<String> = ["ok", "unbalanced", "worn", "loose"]
            .map(String::from)
            .into();
        let p = pack(&PackRequest {
            model: example("vibration/model.onnx"),
            scaler: None,
            labels: Some(names.clone()),
            precision: Precision::F32,
            sections: Sections::default(),
        })
        .unwrap();
        let m = kinglet_runtime::Model::parse(&p.blob).unwrap();
        assert_eq!(m.labels().collect::<Vec<_>>(), names);
        assert_eq!(
            p.notes,
            ["--labels replaces the model's own class labels (\"normal\", \"imbalance\", \"bearing_wear\", \"loose_mount\")"]
        );
        let e = pack(&PackRequest {
            model: example("vibration/model.onnx"),
            scaler: None,
            labels: Some(names[..3].to_vec()),
            precision: Precision::F32,
            sections: Sections::default(),
        })
        .unwrap_err();
        assert!(
            e.to_string()
                .contains("--labels gives 3 labels for a model with 4 classes"),
            "{e}"
        );
    }

    #[test]
    fn labels_must_be_one_non_empty_name_per_class() {
        assert!(check_labels(&["a".into(), "b".into()], 2).is_ok());
        let e = check_labels(&["a".into(), " ".into()], 2).unwrap_err();
        assert!(e.to_string().contains("label 1 (0-based) is empty"), "{e}");
        let e = check_labels(&["a".into()], 2).unwrap_err();
        assert!(
            e.to_string()
                .contains("1 labels for a model with 2 classes"),
            "{e}"
        );
    }
}
