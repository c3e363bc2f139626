//! Running every row through one blob with the runtime itself: `Model::infer_traced` for the
//! scores and the last layer's raw outputs, `Model::classify` for the class alone. Nothing here
//! computes a number the runtime does not; the results are the firmware's, bit for bit.
//!
//! Rows are independent and run in parallel (rayon); results are collected in row order, and
//! the error reported is that of the first row that fails, as a serial run would report it.
use anyhow::{Context, Result};
use kinglet_runtime::{Activations, Model, Stage};
use rayon::prelude::*;

use super::feed::{Entry, Rows};

/// The last layer's outputs, before softmax or sigmoid, as the scratch buffer holds them.
#[derive(Debug, Clone, PartialEq)]
pub enum LastOutputs {
    /// int8 values (int8 blobs).
    Int8(Vec<i8>),
    /// f32 values (f32 blobs).
    F32(Vec<f32>),
}

/// What one row gave.
#[derive(Debug, Clone, PartialEq)]
pub struct ScoredRow {
    /// The class the chosen entry point returned.
    pub class: usize,
    /// `Model::infer`'s class.
    pub infer_class: usize,
    /// `Model::classify`'s class.
    pub classify_class: usize,
    /// `Model::infer`'s score of its class (`Prediction::score`; `1 − p` for a sigmoid's class 0).
    pub score: f32,
    /// The scores `Model::infer` wrote (probabilities, or logits for a logits output).
    pub scores: Vec<f32>,
    /// The last layer's raw outputs.
    pub outputs: LastOutputs,
}

struct Scratch {
    scratch: Vec<u8>,
    scores: Vec<f32>,
}

fn score_row(
    model: &Model<'_>,
    rows: &Rows,
    r: usize,
    entry: Entry,
    s: &mut Scratch,
) -> Result<ScoredRow, kinglet_runtime::RunError> {
    let last = model.layers().count();
    let n = model.output_len();
    let mut outputs = LastOutputs::Int8(Vec::new());
    let p = model.infer_traced(
        rows.input(r),
        &mut s.scratch,
        &mut s.scores,
        &mut |st: &Stage<'_>| {
            if st.index != last {
                return;
            }
            outputs = match st.values {
                // An int16 tensor is only ever the input (stage 0), never the last layer's.
                Activations::Int8 { .. } | Activations::Int16 { .. } => {
                    LastOutputs::Int8((0..n).map(|k| st.values.int8(k).unwrap_or(0)).collect())
                }
                Activations::F32 { .. } => {
                    LastOutputs::F32((0..n).map(|k| st.values.real(k).unwrap_or(0.0)).collect())
                }
            };
        },
    )?;
    let classify_class = model.classify(rows.input(r), &mut s.scratch)?;
    Ok(ScoredRow {
        class: match entry {
            Entry::Infer => p.class,
            Entry::Classify => classify_class,
        },
        infer_class: p.class,
        classify_class,
        score: p.score,
        scores: s.scores.get(..n).unwrap_or(&[]).to_vec(),
        outputs,
    })
}

/// Runs every row of `rows` through `model`; the class comes from `entry`.
///
/// # Errors
/// Rows of another width than the model's input, and a row the runtime refuses (named by its
/// data row, 1-based, header not counted, as the dataset loader counts).
pub fn score_rows(model: &Model<'_>, rows: &Rows, entry: Entry) -> Result<Vec<ScoredRow>> {
    rows.data.check_width(model.input_len())?;
    let new = || Scratch {
        scratch: vec![0; model.scratch_bytes()],
        scores: vec![0.0; model.output_len()],
    };
    let results: Vec<Result<ScoredRow, kinglet_runtime::RunError>> = (0..rows.data.rows)
        .into_par_iter()
        .map_init(new, |s, r| score_row(model, rows, r, entry, s))
        .collect();
    results
        .into_iter()
        .enumerate()
        .map(|(r, res)| {
            res.with_context(|| {
                format!(
                    "{}: data row {} (1-based, header not counted): the model cannot run it",
                    rows.data.source,
                    rows.first_row + r + 1
                )
            })
        })
        .collect()
}
