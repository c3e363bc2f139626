//! [`super::run::Engine::Batched`]: chunks of rows through [`crate::host`]'s batched forward
//! passes, giving the per-row outcomes [`super::run::evaluate`] gives.
use rayon::prelude::*;

use super::fidelity::{int8_bounds, Energy};
use super::pair::ModelPair;
use super::run::{Fed, Parallelism, RowFailure, RowOutcome, BATCH};
use crate::host::{FloatBatch, FloatHost, Int8Batch, Int8Host};
use crate::score::feed::{input_at, Entry};

/// The models read for batches.
pub(crate) struct Hosts {
    float: FloatHost,
    int8: Int8Host,
    /// The int8 input is the raw row ([`ModelPair::raw_int8_input`]).
    raw_input: bool,
}

impl Hosts {
    /// Both sides of `pair`; `None` if either is not the precision it should be (a
    /// [`ModelPair`] has checked that).
    pub(crate) fn new(pair: &ModelPair<'_>) -> Option<Self> {
        Some(Hosts {
            float: FloatHost::new(&pair.float)?,
            int8: Int8Host::new(&pair.int8)?,
            raw_input: pair.raw_int8_input(),
        })
    }
}

/// The first failure of two sides' first failing rows: the earlier row, the float model's on a
/// tie (the per-row path runs the float model first).
fn first_failure(
    float: Option<(usize, kinglet_runtime::RunError)>,
    int8: Option<(usize, kinglet_runtime::RunError)>,
    start: usize,
) -> Option<RowFailure> {
    let pick = match (float, int8) {
        (Some(f), Some(q)) if q.0 < f.0 => ("int8", q),
        (Some(f), _) => ("float", f),
        (None, Some(q)) => ("int8", q),
        (None, None) => return None,
    };
    let (which, (row, error)) = pick;
    Some(RowFailure {
        row: start + row,
        which,
        error,
    })
}

/// Per-row outcomes of one batch of both sides (`x`, the batch's raw rows; `f`, from
/// [`FloatHost::run_lean`], whose input stage `host` scales row by row here if it was not
/// kept); `raw` when the int8 input tensor is compared with the raw row instead of the float
/// model's scaled input.
fn outcomes(
    host: &FloatHost,
    f: &FloatBatch,
    q: &Int8Batch,
    entry: Entry,
    x: &[f32],
    raw: bool,
) -> Vec<RowOutcome> {
    let out_len = f.scores.len().checked_div(f.rows).unwrap_or(0);
    let mut scaled = Vec::new();
    (0..f.rows)
        .map(|r| {
            let energy = f
                .stages
                .iter()
                .zip(&q.stages)
                .enumerate()
                .map(|(k, (fs, qs))| {
                    let mut e = Energy::default();
                    let bounds = int8_bounds(qs.scale, qs.zero_point);
                    let w = qs.width;
                    let float_row = match k {
                        0 if raw => x.get(r * w..(r + 1) * w).unwrap_or(&[]),
                        0 if fs.values.is_empty() => {
                            host.scaled_row(x.get(r * w..(r + 1) * w).unwrap_or(&[]), &mut scaled);
                            &scaled
                        }
                        _ => fs.row(r),
                    };
                    for (i, &v) in float_row.iter().enumerate() {
                        e.add(v, qs.real(r, i), bounds);
                    }
                    e
                })
                .collect();
            let span = r * out_len..(r + 1) * out_len;
            let infer = q.infer_class.get(r).copied().unwrap_or(0);
            let classify = q.classify_class.get(r).copied().unwrap_or(0);
            RowOutcome {
                float_class: f.class.get(r).copied().unwrap_or(0),
                int8_class: match entry {
                    Entry::Infer => infer,
                    Entry::Classify => classify,
                },
                int8_infer_class: infer,
                int8_classify_class: classify,
                float_scores: f.scores.get(span.clone()).unwrap_or(&[]).to_vec(),
                int8_scores: q.scores.get(span).unwrap_or(&[]).to_vec(),
                energy,
            }
        })
        .collect()
}

/// Rows `start..start + rows` of `fed` through both models.
fn run_batch(
    hosts: &Hosts,
    fed: &Fed<'_>,
    start: usize,
    rows: usize,
) -> Result<Vec<RowOutcome>, RowFailure> {
    let w = fed.data.width;
    let x = fed
        .data
        .features
        .get(start * w..(start + rows) * w)
        .unwrap_or(&[]);
    let f = hosts.float.run_lean(x, rows);
    let q = hosts
        .int8
        .run(rows, |r| input_at(fed.data, fed.integers, start + r));
    match (f, q) {
        (Ok(f), Ok(q)) => Ok(outcomes(
            &hosts.float,
            &f,
            &q,
            fed.entry,
            x,
            hosts.raw_input,
        )),
        (f, q) => match first_failure(f.err(), q.err(), start) {
            Some(e) => Err(e),
            None => Ok(Vec::new()),
        },
    }
}

/// Every row of `fed` through both models in batches of [`BATCH`] rows; the failure of the
/// first row that cannot be run.
pub(crate) fn evaluate(
    hosts: &Hosts,
    fed: &Fed<'_>,
    parallelism: Parallelism,
    progress: &(dyn Fn(u64) + Sync),
) -> Result<Vec<RowOutcome>, RowFailure> {
    let rows = fed.data.rows;
    let one = |b: usize| {
        let start = b * BATCH;
        let n = BATCH.min(rows - start);
        let r = run_batch(hosts, fed, start, n);
        progress(n as u64);
        r
    };
    let batches = rows.div_ceil(BATCH);
    let per_batch: Vec<Result<Vec<RowOutcome>, RowFailure>> = match parallelism {
        Parallelism::Serial => (0..batches).map(one).collect(),
        Parallelism::Parallel => (0..batches).into_par_iter().map(one).collect(),
    };
    let mut out = Vec::with_capacity(rows);
    for b in per_batch {
        out.extend(b?);
    }
    Ok(out)
}
