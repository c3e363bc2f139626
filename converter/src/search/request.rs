//! The whole of `kinglet pack --weights auto` as one library call: the request's model and
//! calibration rows as a pack would take them, the held-out rows, the search, and the notes.
use anyhow::{bail, Result};
use std::path::PathBuf;

use super::overlap::{refuse_same_file, repeated_rows, repeated_warning};
use super::{search, Candidate, Search, SearchInput};
use crate::dataset::{LabelColumn, LoadOptions};
use crate::pack::request::{calibration_rows, prepare, PackRequest, Precision};
use crate::score::feed::{load_rows, Feed};
use crate::vet::{Criteria, Engine, Gate, How, Parallelism};

/// The held-out rows the bound is judged on.
#[derive(Debug, Clone, PartialEq)]
pub struct Holdout {
    /// CSV or `.npy` features.
    pub path: PathBuf,
    /// A CSV label column.
    pub label: Option<LabelColumn>,
    /// Labels for `.npy` features.
    pub label_file: Option<PathBuf>,
}

/// Default bound with labelled rows: at most this accuracy drop, percentage points.
pub const DEFAULT_MAX_DROP_PP: f64 = 1.0;
/// Default bound without labels: at least this agreement with the float model, percent.
pub const DEFAULT_MIN_AGREEMENT_PCT: f64 = 99.0;

/// What the search found, and what to say about it.
#[derive(Debug, Clone)]
pub struct Searched {
    /// The candidates and the pick.
    pub search: Search,
    /// The bound applied (the defaults filled in).
    pub criteria: Criteria,
    /// Lines for the user.
    pub notes: Vec<String>,
    /// Warnings (rows in both files).
    pub warnings: Vec<String>,
}

/// Runs the search `req` (an int8 pack request; its `--weights` are ignored) describes, on
/// `holdout`, with `criteria` (the default bound where it sets none) and an optional flash
/// budget in bytes; writes nothing.
pub fn search_pack(
    req: &PackRequest,
    holdout: &Holdout,
    criteria: Criteria,
    flash_budget: Option<u64>,
    progress: &dyn Fn(&Candidate),
) -> Result<Searched> {
    let Precision::Int8 {
        calibration,
        label,
        method,
        bias_correction,
        fold_scaler,
        ..
    } = &req.precision
    else {
        bail!("--weights auto chooses int8 or int4 weights and --float keeps f32 weights; drop one of them");
    };
    refuse_same_file(calibration, &holdout.path)?;
    let (model, mut notes) = prepare(req)?;
    let cal = calibration_rows(calibration, label.clone(), model.input_len)?;
    let rows = load_rows(
        &holdout.path,
        &LoadOptions {
            label: holdout.label.clone(),
            label_file: holdout.label_file.clone(),
            ..LoadOptions::default()
        },
        Feed::F32,
    )?;
    rows.data.check_width(model.input_len)?;
    let labelled = rows.data.labels.is_some();
    let mut criteria = criteria;
    if criteria.max_drop_pp.is_none() && criteria.min_agreement_pct.is_none() {
        if labelled {
            criteria.max_drop_pp = Some(DEFAULT_MAX_DROP_PP);
            criteria.gate.get_or_insert(Gate::Estimate);
        } else {
            criteria.min_agreement_pct = Some(DEFAULT_MIN_AGREEMENT_PCT);
        }
    }
    let options = req.int8_options(*method, *bias_correction, *fold_scaler, Default::default());
    let warnings = repeated_warning(repeated_rows(&cal, &rows.data), &rows.data)
        .into_iter()
        .collect();
    let input = SearchInput {
        model: &model,
        calibration: &cal,
        options,
        heldout: &rows,
        criteria: criteria.clone(),
        flash_budget,
        how: How {
            parallelism: Parallelism::Parallel,
            engine: Engine::Batched,
        },
    };
    let search = search(&input, progress)?;
    notes.push(format!(
        "calibrated on {} rows of {} ({}); judged on {} held-out rows of {}{}",
        cal.rows,
        calibration.display(),
        method,
        rows.data.rows,
        holdout.path.display(),
        if labelled {
            ""
        } else {
            " (no labels: agreement with the float model only)"
        }
    ));
    Ok(Searched {
        search,
        criteria,
        notes,
        warnings,
    })
}
