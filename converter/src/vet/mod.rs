//! `kinglet vet`: the accuracy comparison of an int8 blob against its float model, on the
//! host, with the runtime's own arithmetic on both sides (in batches, the int8 side bit for bit;
//! see [`run`]); the int8 blob is fed the way the firmware feeds it (f32 features or raw `i16` /
//! `u8` integers, `infer` or `classify`).
//!
//! - [`run`] evaluates every row through both models (in parallel, with serial results);
//! - [`metrics`] computes accuracy, confusion matrices, precision and recall, agreement;
//! - [`stats`] gives the 95% interval of the accuracy drop (Newcombe 1998, method 10) and
//!   McNemar's exact test;
//! - [`faults`] counts the fault calls quantisation changed, when benign classes are named;
//! - [`repeats`] counts repeated rows (the interval assumes independent ones);
//! - [`fidelity`] sums each tensor's SQNR (int8 dequantised against float);
//! - [`summary`] assembles the [`summary::VetReport`]; [`render_text`] and [`render_html`]
//!   show it.
mod batched;
pub mod charts;
pub mod faults;
pub mod fidelity;
pub mod load;
pub mod metrics;
pub mod pair;
pub mod points;
pub mod render_html;
pub mod render_text;
pub mod repeats;
pub mod run;
pub mod stats;
pub mod summary;

use anyhow::{bail, Context, Result};

use crate::dataset::{resolve_labels, Dataset};
use crate::score::feed::{Entry, Rows};
pub use pair::ModelPair;
pub use run::{Engine, Fed, Parallelism};
pub use summary::{Criteria, EntrySplit, Gate, Measured, Sources, VetReport};

/// Turns the dataset's labels (class names or indices, as written) into class indices of the
/// pair's models; `None` when the rows have no labels.
pub fn dataset_labels(data: &Dataset, pair: &ModelPair<'_>) -> Result<Option<Vec<usize>>> {
    let Some(raw) = &data.labels else {
        return Ok(None);
    };
    let names = pair.class_names();
    let labels = resolve_labels(raw, &names, pair.classes())
        .with_context(|| format!("{}: bad label", data.source))?;
    Ok(Some(labels))
}

/// Compares the pair on `data`, fed to both as `Input::F32` through `Model::infer`: evaluates
/// every row and builds the report.
///
/// `progress` is called with the number of rows finished, from worker threads.
pub fn vet(
    pair: &ModelPair<'_>,
    data: &Dataset,
    sources: &Sources,
    criteria: &Criteria,
    parallelism: Parallelism,
    progress: &(dyn Fn(u64) + Sync),
) -> Result<VetReport> {
    let fed = Fed {
        data,
        integers: None,
        entry: Entry::Infer,
    };
    let how = How {
        parallelism,
        engine: Engine::Batched,
    };
    vet_fed(pair, &fed, sources, criteria, how, progress)
}

/// [`vet`] through the path a firmware uses: `rows` as loaded for its input type (the int8 blob
/// gets the exact integers of an integer path, the float model the same values as f32) and
/// `entry` for the int8 blob's class; `how` is a [`Parallelism`] (batched) or a [`How`].
pub fn vet_rows(
    pair: &ModelPair<'_>,
    rows: &Rows,
    entry: Entry,
    sources: &Sources,
    criteria: &Criteria,
    how: impl Into<How>,
    progress: &(dyn Fn(u64) + Sync),
) -> Result<VetReport> {
    let how = how.into();
    let fed = Fed {
        data: &rows.data,
        integers: rows.integers.as_ref(),
        entry,
    };
    vet_fed(pair, &fed, sources, criteria, how, progress)
}

/// How the rows are run: on how many threads, and batched or row by row.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct How {
    /// Threads.
    pub parallelism: Parallelism,
    /// Batched or row by row.
    pub engine: Engine,
}

impl From<Parallelism> for How {
    /// Batched, on `parallelism`.
    fn from(parallelism: Parallelism) -> Self {
        How {
            parallelism,
            engine: Engine::Batched,
        }
    }
}

fn vet_fed(
    pair: &ModelPair<'_>,
    fed: &Fed<'_>,
    sources: &Sources,
    criteria: &Criteria,
    how: How,
    progress: &(dyn Fn(u64) + Sync),
) -> Result<VetReport> {
    let data = fed.data;
    if data.rows == 0 {
        bail!("{}: no rows to compare", data.source);
    }
    // Widths first: rows of another model's data fail here, before their labels are judged.
    data.check_width(pair.int8.input_len())?;
    crate::score::feed::check_feed(&pair.int8, fed.feed(), &sources.int8_model)?;
    let labels = dataset_labels(data, pair)?;
    if criteria.max_drop_pp.is_some() && labels.is_none() {
        bail!(
            "{}: --max-drop needs labelled rows (name the label column with --label, or give --label-file for .npy features); without labels use --min-agreement",
            data.source
        );
    }
    let benign = if criteria.benign.is_empty() {
        None
    } else {
        Some(faults::resolve_benign(
            &criteria.benign,
            &pair.class_names(),
            pair.classes(),
        )?)
    };
    let outcomes = run::evaluate(pair, fed, how.parallelism, how.engine, progress)?;
    let mut report = summary::summarise(
        pair,
        &data.source,
        sources,
        &Measured::new(fed.feed(), fed.entry),
        &outcomes,
        summary::Truth {
            labels: labels.as_deref(),
            benign: benign.as_deref(),
        },
        criteria,
    );
    report.repeated_rows = repeats::repeated_rows(data);
    if report.repeated_rows > 0 {
        report.notes.insert(
            0,
            format!(
                "{} of the {} rows repeat an earlier row exactly; the interval and the test assume independent rows, so repeats make them look surer than the data are",
                report.repeated_rows, data.rows
            ),
        );
    }
    Ok(report)
}
