//! `kinglet inspect`: report on a packed blob.
use anyhow::{anyhow, Context, Result};
use kinglet_converter::report::{table, BlobReport};
use kinglet_runtime::Model;
use std::path::PathBuf;

use super::Outcome;

/// Arguments of `kinglet inspect`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The packed model (`.kgl`).
    blob: PathBuf,
    /// Print JSON instead of tables.
    #[arg(long)]
    json: bool,
}

pub fn run(a: Args) -> Result<Outcome> {
    let bytes =
        std::fs::read(&a.blob).with_context(|| format!("cannot read {}", a.blob.display()))?;
    let model = Model::parse(&bytes).map_err(|e| anyhow!("{}: {e}", a.blob.display()))?;
    let report = BlobReport::of(&model);
    if a.json {
        super::out::line(&serde_json::to_string_pretty(&report)?)?;
    } else {
        super::out::emit(&table::render(&report))?;
    }
    Ok(Outcome::Pass)
}
