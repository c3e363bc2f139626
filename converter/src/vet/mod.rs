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
//! - [`tally`] keeps what the report needs of each row, a chunk of rows at a time;
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
pub mod tally;

use anyhow::{bail, Context, Result};

use crate::dataset::{resolve_labels, Dataset, DatasetError, RowLabels, RowStream};
use crate::score::feed::{Entry, Feed, Rows};
pub use pair::ModelPair;
pub use run::{Engine, Fed, Parallelism};
pub use summary::{Criteria, EntrySplit, Gate, Measured, Sources, VetReport};
pub use tally::Tally;

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
    let truth = prepare(
        pair,
        Shape {
            source: &data.source,
            rows: data.rows,
            width: data.width,
            feed: fed.feed(),
        },
        data.labels.as_deref().map(RawLabels::Strings),
        sources,
        criteria,
    )?;
    let outcomes = run::evaluate(pair, fed, how.parallelism, how.engine, progress)?;
    let report = summary::summarise(
        pair,
        &data.source,
        sources,
        &Measured::new(fed.feed(), fed.entry),
        &outcomes,
        truth.as_truth(),
        criteria,
    );
    Ok(with_repeats(report, repeats::repeated_rows(data)))
}

/// Rows a streamed comparison reads and runs at a time ([`vet_stream`]): 16 of the batched
/// engine's batches, 4 MB of f32 rows at 64 features.
pub const STREAM_ROWS: usize = 16 * run::BATCH;

/// [`vet_rows`] on the f32 rows of `stream`, read `chunk_rows` rows at a time (the f32 feed;
/// `entry` for the int8 blob's class): the same report as [`vet_rows`] on the whole file, since
/// every sum is taken in row order either way ([`tally`]), while only one chunk of rows and a
/// few numbers per row are held.
///
/// # Errors
/// Those of [`vet_rows`], and a read error of the stream (a value that is not finite, a file
/// that shrank), naming its row.
#[allow(clippy::too_many_arguments)]
pub fn vet_stream(
    pair: &ModelPair<'_>,
    stream: &mut RowStream,
    entry: Entry,
    sources: &Sources,
    criteria: &Criteria,
    how: impl Into<How>,
    chunk_rows: usize,
    progress: &(dyn Fn(u64) + Sync),
) -> Result<VetReport> {
    let how = how.into();
    let raw_labels = stream.take_labels();
    let source = stream.source().to_string();
    let truth = prepare(
        pair,
        Shape {
            source: &source,
            rows: stream.rows(),
            width: stream.width(),
            feed: Feed::F32,
        },
        raw_labels.as_ref().map(RawLabels::Table),
        sources,
        criteria,
    )?;
    drop(raw_labels);
    let mut tally = Tally::new(pair.stage_names().len());
    let mut repeats = repeats::RepeatCounter::with_rows(stream.rows());
    while let Some(chunk) = stream.next_chunk(chunk_rows)? {
        let fed = Fed {
            data: &chunk,
            integers: None,
            entry,
        };
        let outcomes = run::evaluate_at(
            pair,
            &fed,
            tally.rows(),
            how.parallelism,
            how.engine,
            progress,
        )?;
        tally.add(&outcomes);
        repeats.add(&chunk.features, chunk.width);
    }
    let report = summary::summarise_tally(
        pair,
        &source,
        sources,
        &Measured::new(Feed::F32, entry),
        tally,
        truth.as_truth(),
        criteria,
    );
    Ok(with_repeats(report, repeats.repeats()))
}

/// The rows' source, size and the input type the int8 blob is fed.
struct Shape<'a> {
    source: &'a str,
    rows: usize,
    width: usize,
    feed: Feed,
}

/// The rows' labels as written.
enum RawLabels<'a> {
    /// One string per row.
    Strings(&'a [String]),
    /// Each distinct label once.
    Table(&'a RowLabels),
}

/// The labels and benign classes as class indices.
struct Judged {
    labels: Option<Vec<usize>>,
    benign: Option<Vec<usize>>,
}

impl Judged {
    fn as_truth(&self) -> summary::Truth<'_> {
        summary::Truth {
            labels: self.labels.as_deref(),
            benign: self.benign.as_deref(),
        }
    }
}

/// The checks made before any row is run, and what the rows are judged against.
fn prepare(
    pair: &ModelPair<'_>,
    shape: Shape<'_>,
    raw_labels: Option<RawLabels<'_>>,
    sources: &Sources,
    criteria: &Criteria,
) -> Result<Judged> {
    if shape.rows == 0 {
        bail!("{}: no rows to compare", shape.source);
    }
    // Widths first: rows of another model's data fail here, before their labels are judged.
    if shape.width != pair.int8.input_len() {
        return Err(DatasetError::WrongWidth {
            source_name: shape.source.to_string(),
            found: shape.width,
            expected: pair.int8.input_len(),
        }
        .into());
    }
    crate::score::feed::check_feed(&pair.int8, shape.feed, &sources.int8_model)?;
    let labels = match raw_labels {
        None => None,
        Some(raw) => Some(
            match raw {
                RawLabels::Strings(s) => resolve_labels(s, &pair.class_names(), pair.classes()),
                RawLabels::Table(t) => t.resolve(&pair.class_names(), pair.classes()),
            }
            .with_context(|| format!("{}: bad label", shape.source))?,
        ),
    };
    if criteria.max_drop_pp.is_some() && labels.is_none() {
        bail!(
            "{}: --max-drop needs labelled rows (name the label column with --label, or give --label-file for .npy features); without labels use --min-agreement",
            shape.source
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
    Ok(Judged { labels, benign })
}

/// `report` with its count of repeated rows and the note it calls for.
fn with_repeats(mut report: VetReport, repeated: u64) -> VetReport {
    report.repeated_rows = repeated;
    if repeated > 0 {
        report.notes.insert(
            0,
            format!(
                "{} of the {} rows repeat an earlier row exactly; the interval and the test assume independent rows, so repeats make them look surer than the data are",
                repeated, report.rows
            ),
        );
    }
    report
}
