//! Evaluating every row through both models with the runtime's own kernels.
//!
//! Each row runs through [`kinglet_runtime::Model::infer_traced`] twice: the f32 blob (the runtime's float path)
//! and the int8 blob (the runtime's integer kernels, bit for bit what a board computes). The
//! trace of each gives the tensors for the per-layer fidelity sums.
//!
//! The int8 blob is fed the way the firmware feeds it ([`Feed`]: `Input::F32`, or the raw
//! integers through `Input::I16` / `Input::U8`), and also runs [`kinglet_runtime::Model::classify`];
//! its class is that of the chosen [`Entry`]. The float model is always `infer` on the same
//! values as f32.
//!
//! That is [`Engine::PerRow`]. The default, [`Engine::Batched`], runs chunks of rows through
//! [`crate::host`]'s batched forward passes instead: the int8 side gives the runtime's results
//! bit for bit (tensors, scores, classes of both entries), the f32 side the runtime's steps
//! with dot products summed in another order (within the rounding bound stated in
//! [`crate::host::float`]).
//!
//! Rows are independent, so they run in parallel (rayon); each row's result depends only on
//! the row, results are collected in row order, and every sum over rows is taken afterwards in
//! row order — so a parallel run gives exactly the numbers of a serial one.
use anyhow::{anyhow, Result};
use kinglet_runtime::{Activations, Input, RunError, Stage};
use rayon::prelude::*;

use super::fidelity::{int8_bounds, Energy};
use super::pair::ModelPair;
use crate::dataset::{Dataset, IntegerValues};
use crate::score::feed::{input_at, Entry, Feed};

/// What one row gave.
#[derive(Debug, Clone, PartialEq)]
pub struct RowOutcome {
    /// Class the float model predicts.
    pub float_class: usize,
    /// Class the int8 model predicts through the chosen entry point.
    pub int8_class: usize,
    /// The int8 model's `infer` class.
    pub int8_infer_class: usize,
    /// The int8 model's `classify` class.
    pub int8_classify_class: usize,
    /// The float model's scores.
    pub float_scores: Vec<f32>,
    /// The int8 model's scores.
    pub int8_scores: Vec<f32>,
    /// Per traced tensor (input, then each layer): the float signal and int8 error energy.
    pub energy: Vec<Energy>,
}

impl RowOutcome {
    /// Largest absolute difference between the two models' scores on this row.
    pub fn max_score_diff(&self) -> f64 {
        self.float_scores
            .iter()
            .zip(&self.int8_scores)
            .map(|(f, q)| (f64::from(*f) - f64::from(*q)).abs())
            .fold(0.0, f64::max)
    }
}

/// Serial or parallel evaluation (the results are the same; serial exists for tests and for
/// machines where threads are unwelcome).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Parallelism {
    /// One thread.
    Serial,
    /// rayon's global thread pool (or the pool the caller installed).
    Parallel,
}

/// How rows are run.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum Engine {
    /// Chunks of rows at once, as matrix products ([`crate::host`]).
    #[default]
    Batched,
    /// Every row through the runtime's own `Model::infer_traced` and `Model::classify`.
    PerRow,
}

/// Rows per unit of parallel work (and per progress step) for [`Engine::PerRow`].
const CHUNK: usize = 64;

/// Rows per batch for [`Engine::Batched`].
pub const BATCH: usize = 1024;

/// Buffers one worker reuses across rows.
struct Scratch {
    scratch_f: Vec<u8>,
    scratch_q: Vec<u8>,
    scores_f: Vec<f32>,
    scores_q: Vec<f32>,
    stages: Vec<Vec<f32>>,
}

impl Scratch {
    fn new(pair: &ModelPair<'_>) -> Self {
        Scratch {
            scratch_f: vec![0; pair.float.scratch_bytes()],
            scratch_q: vec![0; pair.int8.scratch_bytes()],
            scores_f: vec![0.0; pair.float.output_len()],
            scores_q: vec![0.0; pair.int8.output_len()],
            stages: pair
                .stage_names()
                .iter()
                .map(|(_, w)| vec![0.0; *w])
                .collect(),
        }
    }
}

/// A row that could not be run, with which model refused it.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct RowFailure {
    pub(crate) row: usize,
    pub(crate) which: &'static str,
    pub(crate) error: RunError,
}

/// The rows as the int8 blob is fed: the f32 values, or the exact integers of an integer path.
#[derive(Debug, Clone, Copy)]
pub struct Fed<'a> {
    /// The rows as f32 (what the float model is fed).
    pub data: &'a Dataset,
    /// The exact integers the int8 blob is fed, for an integer path.
    pub integers: Option<&'a IntegerValues>,
    /// The entry point whose class counts for the int8 blob.
    pub entry: Entry,
}

impl Fed<'_> {
    /// The input type the int8 blob is fed.
    pub fn feed(&self) -> Feed {
        match self.integers {
            None => Feed::F32,
            Some(IntegerValues::I16(_)) => Feed::I16,
            Some(IntegerValues::U8(_)) => Feed::U8,
        }
    }
}

fn eval_row(
    pair: &ModelPair<'_>,
    fed: &Fed<'_>,
    r: usize,
    s: &mut Scratch,
) -> Result<RowOutcome, (&'static str, RunError)> {
    let row = fed.data.row(r);
    let input = input_at(fed.data, fed.integers, r);
    let stages = &mut s.stages;
    let pf = pair
        .float
        .infer_traced(
            Input::F32(row),
            &mut s.scratch_f,
            &mut s.scores_f,
            &mut |st: &Stage<'_>| {
                if let Some(buf) = stages.get_mut(st.index) {
                    for (i, v) in buf.iter_mut().enumerate() {
                        *v = st.values.real(i).unwrap_or(0.0);
                    }
                }
            },
        )
        .map_err(|e| ("float", e))?;
    if pair.raw_int8_input() {
        if let Some(buf) = stages.first_mut() {
            for (d, &x) in buf.iter_mut().zip(row) {
                *d = x;
            }
        }
    }
    let mut energy = vec![Energy::default(); stages.len()];
    let mut add_error = |st: &Stage<'_>| {
        if let (Some(buf), Some(e)) = (stages.get(st.index), energy.get_mut(st.index)) {
            let bounds = match st.values {
                Activations::Int8 {
                    scale, zero_point, ..
                } => int8_bounds(scale, zero_point),
                // Symmetric int16 (an int16 input tensor, format version 7).
                Activations::Int16 { scale, .. } => (-32_768.0 * scale, 32_767.0 * scale),
                Activations::F32 { .. } => (f32::NEG_INFINITY, f32::INFINITY),
            };
            for (i, &f) in buf.iter().enumerate() {
                e.add(f, st.values.real(i).unwrap_or(0.0), bounds);
            }
        }
    };
    let pq = pair
        .int8
        .infer_traced(input, &mut s.scratch_q, &mut s.scores_q, &mut add_error)
        .map_err(|e| ("int8", e))?;
    let classified = pair
        .int8
        .classify(input, &mut s.scratch_q)
        .map_err(|e| ("int8", e))?;
    Ok(RowOutcome {
        float_class: pf.class,
        int8_class: match fed.entry {
            Entry::Infer => pq.class,
            Entry::Classify => classified,
        },
        int8_infer_class: pq.class,
        int8_classify_class: classified,
        float_scores: s.scores_f.clone(),
        int8_scores: s.scores_q.clone(),
        energy,
    })
}

fn eval_chunk(
    pair: &ModelPair<'_>,
    fed: &Fed<'_>,
    c: usize,
    s: &mut Scratch,
) -> Vec<Result<RowOutcome, RowFailure>> {
    let end = fed.data.rows.min((c + 1) * CHUNK);
    (c * CHUNK..end)
        .map(|r| {
            eval_row(pair, fed, r, s).map_err(|(which, error)| RowFailure {
                row: r,
                which,
                error,
            })
        })
        .collect()
}

/// Runs every row of `data` through both models. `progress` is called with the number of rows
/// just finished (from worker threads when parallel).
///
/// Errors name the data row (1-based, header not counted, as the dataset loader counts) and the
/// model that refused it; the error reported is always that of the first such row.
pub fn evaluate(
    pair: &ModelPair<'_>,
    fed: &Fed<'_>,
    parallelism: Parallelism,
    engine: Engine,
    progress: &(dyn Fn(u64) + Sync),
) -> Result<Vec<RowOutcome>> {
    evaluate_at(pair, fed, 0, parallelism, engine, progress)
}

/// [`evaluate`] on rows that start at the file's data row `first_row` (0-based), which errors
/// count from: one chunk of a file read a chunk at a time.
pub(crate) fn evaluate_at(
    pair: &ModelPair<'_>,
    fed: &Fed<'_>,
    first_row: usize,
    parallelism: Parallelism,
    engine: Engine,
    progress: &(dyn Fn(u64) + Sync),
) -> Result<Vec<RowOutcome>> {
    let data = fed.data;
    let failure = |d: &Dataset, f: RowFailure| {
        failure(
            d,
            RowFailure {
                row: f.row + first_row,
                ..f
            },
        )
    };
    data.check_width(pair.int8.input_len())?;
    if let (Engine::Batched, Some(hosts)) = (engine, super::batched::Hosts::new(pair)) {
        return super::batched::evaluate(&hosts, fed, parallelism, progress)
            .map_err(|f| failure(data, f));
    }
    let chunks = data.rows.div_ceil(CHUNK);
    let per_chunk: Vec<Vec<Result<RowOutcome, RowFailure>>> = match parallelism {
        Parallelism::Serial => {
            let mut s = Scratch::new(pair);
            (0..chunks)
                .map(|c| {
                    let r = eval_chunk(pair, fed, c, &mut s);
                    progress(r.len() as u64);
                    r
                })
                .collect()
        }
        Parallelism::Parallel => (0..chunks)
            .into_par_iter()
            .map_init(
                || Scratch::new(pair),
                |s, c| {
                    let r = eval_chunk(pair, fed, c, s);
                    progress(r.len() as u64);
                    r
                },
            )
            .collect(),
    };
    per_chunk
        .into_iter()
        .flatten()
        .map(|r| r.map_err(|f| failure(data, f)))
        .collect()
}

/// The error for a row that could not be run.
fn failure(data: &Dataset, f: RowFailure) -> anyhow::Error {
    anyhow!(
        "{}: data row {} (1-based, header not counted): the {} model cannot run it: {}",
        data.source,
        f.row + 1,
        f.which,
        f.error
    )
}
