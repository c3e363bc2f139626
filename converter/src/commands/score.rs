//! `kinglet score`: run a blob on rows and write what the runtime gives for each row.
use anyhow::{anyhow, bail, Context, Result};
use kinglet_converter::atomic::write_atomic;
use kinglet_converter::output_guard::{check_distinct, Named};
use kinglet_converter::score::render_vectors::{check_name, VectorOptions};
use kinglet_converter::score::{self, render_csv, render_json, render_vectors};
use kinglet_runtime::Model;
use std::path::PathBuf;

use super::rows::RowArgs;
use super::Outcome;

/// What to write.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
enum Format {
    /// CSV: a header, then row, class, label, truth (with labels), score_k..., out_k...
    Csv,
    /// JSON: what was run, then one object per row.
    Json,
    /// One line per row with every number as exact bits, the firmware's test-vector format.
    Vectors,
}

/// A range of data rows, `START..END` (0-based, END excluded) or `START..` (to the last row).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
struct RowRange {
    start: usize,
    end: Option<usize>,
}

impl std::str::FromStr for RowRange {
    type Err = String;

    fn from_str(s: &str) -> Result<Self, Self::Err> {
        let bad = || {
            format!(
                "expected START..END or START.. (0-based data rows, END excluded), such as \
                 150..170, not {}",
                kinglet_converter::echo::quoted(s)
            )
        };
        let (a, b) = s.split_once("..").ok_or_else(bad)?;
        let start = a.trim().parse::<usize>().map_err(|_| bad())?;
        let end = match b.trim() {
            "" => None,
            b => Some(b.parse::<usize>().map_err(|_| bad())?),
        };
        Ok(RowRange { start, end })
    }
}

/// Arguments of `kinglet score`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The packed blob (`.kgl`), int8 or f32.
    blob: PathBuf,
    #[command(flatten)]
    source: RowArgs,
    /// Only these data rows: START..END, 0-based, header not counted, END excluded (150..170),
    /// or START.. to the last row.
    #[arg(long, value_name = "START..END")]
    rows: Option<RowRange>,
    /// What to write.
    #[arg(long, value_enum, default_value = "csv")]
    format: Format,
    /// With --format vectors: the first word of each line [default: the data file's name
    /// without its extension].
    #[arg(long, value_name = "NAME")]
    name: Option<String>,
    /// With --format vectors: append each row's inputs (` feat=`).
    #[arg(long)]
    with_inputs: bool,
    /// The file to write (replaced atomically) [default: standard output].
    #[arg(short, long, value_name = "FILE")]
    out: Option<PathBuf>,
}

fn vector_options(a: &Args) -> Result<Option<VectorOptions>> {
    if a.format != Format::Vectors {
        if a.name.is_some() {
            bail!("--name applies to --format vectors (it names the lines' set)");
        }
        if a.with_inputs {
            bail!("--with-inputs applies to --format vectors");
        }
        return Ok(None);
    }
    let name = match &a.name {
        Some(n) => {
            check_name(n).context("--name")?;
            n.clone()
        }
        None => {
            let stem = a
                .source
                .data
                .file_stem()
                .map(|s| s.to_string_lossy().into_owned())
                .unwrap_or_default();
            check_name(&stem).with_context(|| {
                format!(
                    "{}: give the set a name with --name",
                    a.source.data.display()
                )
            })?;
            stem
        }
    };
    Ok(Some(VectorOptions {
        name,
        with_inputs: a.with_inputs,
    }))
}

pub fn run(a: Args) -> Result<Outcome> {
    if let Some(out) = &a.out {
        let mut inputs = vec![Named::new("the blob", &a.blob)];
        inputs.extend(a.source.inputs());
        check_distinct(&[Named::new("the output (-o)", out)], &inputs)?;
    }
    let vectors = vector_options(&a)?;
    let bytes =
        std::fs::read(&a.blob).with_context(|| format!("cannot read {}", a.blob.display()))?;
    let model = Model::parse(&bytes)
        .map_err(|e| anyhow!("{}: not a valid model blob: {e}", a.blob.display()))?;
    let mut rows = super::rows::load(&a.source)?;
    if let Some(r) = a.rows {
        let end = r.end.unwrap_or(rows.data.rows);
        rows = rows.select(r.start, end).context("--rows")?;
    }
    let scored = score::score(
        &model,
        &a.blob.display().to_string(),
        &rows,
        a.source.entry.into(),
    )?;
    let text = match (&vectors, a.format) {
        (Some(o), _) => render_vectors::render(&scored, &rows, o)?,
        (None, Format::Json) => render_json::render(&scored)?,
        (None, _) => render_csv::render(&scored)?,
    };
    match &a.out {
        Some(path) => {
            write_atomic(path, text.as_bytes())?;
            super::out::line(&format!(
                "wrote {}: {} rows through {} and {}",
                path.display(),
                scored.rows.len(),
                scored.feed.input_name(),
                scored.entry.call_name()
            ))?;
        }
        None => super::out::emit(&text)?,
    }
    Ok(Outcome::Pass)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn row_ranges_parse() {
        assert_eq!(
            "150..170".parse::<RowRange>(),
            Ok(RowRange {
                start: 150,
                end: Some(170)
            })
        );
        assert_eq!(
            "3..".parse::<RowRange>(),
            Ok(RowRange {
                start: 3,
                end: None
            })
        );
        for bad in ["", "5", "..5", "a..b", "-1..3", "1...3", "1..2..3"] {
            let e = bad.parse::<RowRange>().unwrap_err();
            assert!(e.starts_with("expected START..END"), "{bad}: {e}");
        }
    }
}
