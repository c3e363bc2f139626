//! `kinglet pack --weights auto`: the weight-precision search run, the picked blob written,
//! and the table of candidates printed.
use anyhow::{bail, Result};
use kinglet_converter::atomic::write_atomic;
use kinglet_converter::pack::request::PackRequest;
use kinglet_converter::report::{table, BlobReport};
use kinglet_converter::search::render::render;
use kinglet_converter::search::request::{search_pack, Holdout};
use kinglet_converter::search::Candidate;
use kinglet_converter::vet::{Criteria, Gate};
use kinglet_runtime::Model;
use std::path::{Path, PathBuf};

use super::Outcome;

/// The `--weights auto` options of `kinglet pack`.
#[derive(Debug, Clone)]
pub struct SearchArgs {
    pub holdout: Option<PathBuf>,
    pub holdout_label: Option<kinglet_converter::dataset::LabelColumn>,
    pub holdout_label_file: Option<PathBuf>,
    pub max_drop: Option<f64>,
    pub upper: bool,
    pub min_agreement: Option<f64>,
    pub flash_budget: Option<u64>,
}

/// `pack --weights auto --json`: the written blob (if any), the search, and the picked blob's
/// report.
#[derive(serde::Serialize)]
struct SearchJson<'a> {
    blob: Option<String>,
    search: &'a kinglet_converter::search::Search,
    notes: &'a [String],
    #[serde(skip_serializing_if = "Option::is_none")]
    report: Option<&'a BlobReport>,
}

pub fn run(a: &SearchArgs, req: &PackRequest, out: &Path, json: bool) -> Result<Outcome> {
    let Some(path) = a.holdout.clone() else {
        bail!("--weights auto needs --holdout <rows.csv|rows.npy>: held-out rows (not the calibration rows) to judge each candidate on");
    };
    super::vet::check_drop(a.max_drop)?;
    super::vet::check_agreement(a.min_agreement)?;
    let holdout = Holdout {
        path,
        label: a.holdout_label.clone(),
        label_file: a.holdout_label_file.clone(),
    };
    let criteria = Criteria {
        max_drop_pp: a.max_drop,
        gate: Some(if a.upper {
            Gate::UpperLimit
        } else {
            Gate::Estimate
        }),
        min_agreement_pct: a.min_agreement,
        ..Criteria::default()
    };
    let bar = super::progress::counter("weight search, candidates packed and vetted");
    let tick = |c: &Candidate| {
        bar.inc(1);
        bar.set_message(c.label());
    };
    let found = search_pack(req, &holdout, criteria, a.flash_budget, &tick);
    bar.finish_and_clear();
    let found = found?;
    for w in &found.warnings {
        eprintln!("kinglet: warning: {w}");
    }
    let picked = found.search.picked();
    let report = match picked {
        Some(p) => {
            write_atomic(out, &p.blob)?;
            let m = Model::parse(&p.blob)
                .map_err(|e| anyhow::anyhow!("internal: picked blob rejected: {e}"))?;
            Some(BlobReport::of(&m))
        }
        None => None,
    };
    if json {
        let v = SearchJson {
            blob: picked.map(|_| out.display().to_string()),
            search: &found.search,
            notes: &found.notes,
            report: report.as_ref(),
        };
        super::out::line(&serde_json::to_string_pretty(&v)?)?;
    } else {
        for n in &found.notes {
            super::out::line(n)?;
        }
        super::out::emit(&render(&found.search, &found.criteria, a.flash_budget))?;
        if let (Some(p), Some(r)) = (picked, &report) {
            super::out::line(&format!("wrote {} ({} bytes)", out.display(), p.bytes))?;
            super::out::emit(&table::render(r))?;
        }
    }
    Ok(if picked.is_some() {
        Outcome::Pass
    } else {
        Outcome::CheckFailed
    })
}
