//! `kinglet score`: run a blob on rows with the runtime itself and write, per row and in input
//! order, what the firmware would get: the class, its label, the scores and the last layer's
//! raw outputs.
//!
//! - [`feed`] names the input type (`f32`, `i16`, `u8`) and entry point (`infer`, `classify`)
//!   and loads rows for them (integer rows exactly, or an error naming the row and column);
//! - [`run`] runs each row through `Model::infer_traced` and `Model::classify`;
//! - [`render_csv`], [`render_json`] and [`render_vectors`] write the results: CSV and JSON
//!   for scripts, and one line per row with every number as exact bits, the format of the
//!   firmware's test vectors (`tests/fixtures/vectors/`).
pub mod feed;
pub mod render_csv;
pub mod render_json;
pub mod render_vectors;
pub mod run;

use anyhow::{Context, Result};
use kinglet_runtime::{Model, OutputKind, Precision};

use crate::dataset::{resolve_labels, DatasetError};
pub use feed::{load_rows, Entry, Feed, Rows, SelectError};
pub use run::{score_rows, LastOutputs, ScoredRow};

/// Every row's result, with what was run.
#[derive(Debug, Clone, PartialEq)]
pub struct Scored {
    /// The blob's file.
    pub blob: String,
    /// The rows' file.
    pub data: String,
    /// The blob's precision.
    pub precision: Precision,
    /// The input type the rows went through.
    pub feed: Feed,
    /// The entry point that gave the class.
    pub entry: Entry,
    /// The blob's output function.
    pub output: OutputKind,
    /// The blob's class names (empty when it has none).
    pub class_names: Vec<String>,
    /// The data row (0-based, header not counted) of the first result.
    pub first_row: usize,
    /// The true class of each row, when the rows have labels.
    pub truth: Option<Vec<usize>>,
    /// One result per row, in input order.
    pub rows: Vec<ScoredRow>,
}

impl Scored {
    /// The name of class `k`, if the blob has names.
    pub fn class_name(&self, k: usize) -> Option<&str> {
        self.class_names.get(k).map(String::as_str)
    }
}

/// `int8` or `f32`.
pub fn precision_name(p: Precision) -> &'static str {
    match p {
        Precision::Int8 => "int8",
        Precision::F32 => "f32",
    }
}

/// Runs `rows` through `model` (read from the file `blob`) and collects the results.
///
/// # Errors
/// Those of [`score_rows`], and labels that are neither class names of the blob nor class
/// indices.
pub fn score(model: &Model<'_>, blob: &str, rows: &Rows, entry: Entry) -> Result<Scored> {
    feed::check_feed(model, rows.feed(), blob)?;
    let results = score_rows(model, rows, entry)?;
    let class_names: Vec<String> = model.labels().map(str::to_string).collect();
    let truth = match &rows.data.labels {
        None => None,
        Some(raw) => Some(
            resolve_labels(raw, &class_names, model.classes())
                .map_err(|e| match e {
                    // Count the row in the file, not in the selected range.
                    DatasetError::UnknownLabel {
                        row,
                        label,
                        expected,
                    } => DatasetError::UnknownLabel {
                        row: row + rows.first_row,
                        label,
                        expected,
                    },
                    e => e,
                })
                .with_context(|| format!("{}: bad label", rows.data.source))?,
        ),
    };
    Ok(Scored {
        blob: blob.to_string(),
        data: rows.data.source.clone(),
        precision: model.precision(),
        feed: rows.feed(),
        entry,
        output: model.desc().output,
        class_names,
        first_row: rows.first_row,
        truth,
        rows: results,
    })
}
