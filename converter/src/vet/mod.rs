//! `kinglet vet`: the accuracy comparison of an int8 blob against its float model, on the
//! host, with the runtime's own kernels on both sides.
//!
//! - [`run`] evaluates every row through both models (in parallel, with serial results);
//! - [`metrics`] computes accuracy, confusion matrices, precision and recall, agreement;
//! - [`stats`] gives the 95% interval of the accuracy drop (Newcombe 1998, method 10) and
//!   McNemar's exact test;
//! - [`fidelity`] sums each tensor's SQNR (int8 dequantised against float);
//! - [`summary`] assembles the [`summary::VetReport`]; [`render_text`] and [`render_html`]
//!   show it.
pub mod charts;
pub mod fidelity;
pub mod load;
pub mod metrics;
pub mod pair;
pub mod render_html;
pub mod render_text;
pub mod run;
pub mod stats;
pub mod summary;

use anyhow::{bail, Context, Result};

use crate::dataset::{resolve_labels, Dataset};
pub use pair::ModelPair;
pub use run::Parallelism;
pub use summary::{Criteria, Gate, Sources, VetReport};

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

/// Compares the pair on `data`: evaluates every row and builds the report.
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
    if data.rows == 0 {
        bail!("{}: no rows to compare", data.source);
    }
    // Widths first: rows of another model's data fail here, before their labels are judged.
    data.check_width(pair.int8.input_len())?;
    let labels = dataset_labels(data, pair)?;
    if criteria.max_drop_pp.is_some() && labels.is_none() {
        bail!(
            "{}: --max-drop needs labelled rows (name the label column with --label, or give --label-file for .npy features); without labels use --min-agreement",
            data.source
        );
    }
    let outcomes = run::evaluate(pair, data, parallelism, progress)?;
    Ok(summary::summarise(
        pair,
        &data.source,
        sources,
        &outcomes,
        labels.as_deref(),
        criteria,
    ))
}
