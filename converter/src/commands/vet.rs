//! `kinglet vet`: compare an int8 blob with its float model on labelled (or unlabelled) rows.
use anyhow::{anyhow, bail, Context, Result};
use kinglet_converter::atomic::write_atomic;
use kinglet_converter::echo;
use kinglet_converter::output_guard::{check_distinct, Named};
use kinglet_converter::score::Feed;
use kinglet_converter::vet::load::load_float;
use kinglet_converter::vet::render_text::TextOptions;
use kinglet_converter::vet::{
    self, render_html, render_text, Criteria, Gate, ModelPair, Parallelism, Sources,
};
use kinglet_runtime::Model;
use std::io::IsTerminal;
use std::path::PathBuf;

use super::rows::RowArgs;
use super::Outcome;

/// What `--max-drop` is compared with.
#[derive(Debug, Clone, Copy, clap::ValueEnum)]
enum GateArg {
    /// The measured accuracy drop.
    Estimate,
    /// The upper limit of the drop's 95% interval (stricter).
    Upper,
}

/// Arguments of `kinglet vet`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The float model: `.onnx`, a `.json` plain model description, or an f32 `.kgl` blob.
    float_model: PathBuf,
    /// The int8 blob (`.kgl`) to judge.
    int8_blob: PathBuf,
    #[command(flatten)]
    source: RowArgs,
    /// Fail (exit code 1) when int8 accuracy is more than this many percentage points below
    /// float accuracy.
    #[arg(long, value_name = "PP")]
    max_drop: Option<f64>,
    /// What --max-drop is compared with.
    #[arg(long, value_enum, default_value = "estimate", requires = "max_drop")]
    gate: GateArg,
    /// Fail (exit code 1) when fewer than this percentage of rows get the same class from
    /// both models.
    #[arg(long, value_name = "PERCENT")]
    min_agreement: Option<f64>,
    /// The benign ("all is well") classes, by name or index, comma-separated: the report then
    /// lists first the rows where int8 newly misses a fault (calls benign what float caught)
    /// or newly raises a false alarm, with counts per fault class.
    #[arg(long, value_name = "CLASS", value_delimiter = ',')]
    benign: Vec<String>,
    /// Fail (exit code 1) when more than this many rows are new missed faults (needs --benign).
    #[arg(long, value_name = "N", requires = "benign")]
    max_new_misses: Option<u64>,
    /// Print the report as JSON (with per-row predictions).
    #[arg(long)]
    json: bool,
    /// Also write a self-contained HTML report (heat maps, SQNR bars, score histogram).
    #[arg(long, value_name = "FILE")]
    html: Option<PathBuf>,
    /// Disagreeing rows to list in the text report.
    #[arg(long, value_name = "N", default_value_t = 10)]
    show: usize,
    /// Evaluate rows on one thread (the results are the same).
    #[arg(long)]
    serial: bool,
    /// Run every row through the runtime's own `Model::infer_traced` and `Model::classify`
    /// rather than in batches (slower; the int8 results are the same bit for bit, the float
    /// ones agree to rounding).
    #[arg(long)]
    per_row: bool,
}

/// `--max-drop`: percentage points, -100 to 100 (a negative bound asks int8 to gain accuracy).
pub(super) fn check_drop(v: Option<f64>) -> Result<()> {
    match v {
        Some(x) if !x.is_finite() || !(-100.0..=100.0).contains(&x) => bail!(
            "--max-drop must be a number of percentage points between -100 and 100, not {}",
            echo::number(x)
        ),
        _ => Ok(()),
    }
}

/// `--min-agreement`: a percentage of rows, 0 to 100.
pub(super) fn check_agreement(v: Option<f64>) -> Result<()> {
    match v {
        Some(x) if !x.is_finite() || !(0.0..=100.0).contains(&x) => bail!(
            "--min-agreement must be a percentage of rows between 0 and 100, not {}",
            echo::number(x)
        ),
        _ => Ok(()),
    }
}

pub fn run(a: Args) -> Result<Outcome> {
    if let Some(html) = &a.html {
        let mut inputs = vec![
            Named::new("the float model", &a.float_model),
            Named::new("the int8 blob", &a.int8_blob),
        ];
        inputs.extend(a.source.inputs());
        check_distinct(&[Named::new("--html", html)], &inputs)?;
    }
    check_drop(a.max_drop)?;
    check_agreement(a.min_agreement)?;
    let int8_bytes = std::fs::read(&a.int8_blob)
        .with_context(|| format!("cannot read {}", a.int8_blob.display()))?;
    let int8 = Model::parse(&int8_bytes)
        .map_err(|e| anyhow!("{}: not a valid model blob: {e}", a.int8_blob.display()))?;
    let float = load_float(&a.float_model, &int8)?;
    let float_model = Model::parse(&float.blob)
        .map_err(|e| anyhow!("{}: not a valid model blob: {e}", a.float_model.display()))?;
    let pair = ModelPair::new(float_model, int8)?;
    let criteria = Criteria {
        max_drop_pp: a.max_drop,
        gate: Some(match a.gate {
            GateArg::Estimate => Gate::Estimate,
            GateArg::Upper => Gate::UpperLimit,
        }),
        min_agreement_pct: a.min_agreement,
        benign: a.benign.clone(),
        max_new_misses: a.max_new_misses,
    };
    let sources = Sources {
        float_model: a.float_model.display().to_string(),
        int8_model: a.int8_blob.display().to_string(),
    };
    let parallelism = if a.serial {
        Parallelism::Serial
    } else {
        Parallelism::Parallel
    };
    let how = vet::How {
        parallelism,
        engine: if a.per_row {
            vet::Engine::PerRow
        } else {
            vet::Engine::Batched
        },
    };
    let entry = a.source.entry.into();
    // The f32 feed reads the rows a chunk at a time; an integer feed loads them whole (its
    // exact integers are read by the whole-file loaders).
    let (mut report, bar) = if Feed::from(a.source.feed) == Feed::F32 {
        let mut stream = super::rows::open_stream(&a.source)?;
        let bar = super::progress::rows_bar("vetting", stream.rows());
        let r = vet::vet_stream(
            &pair,
            &mut stream,
            entry,
            &sources,
            &criteria,
            how,
            vet::STREAM_ROWS,
            &|n| bar.inc(n),
        )?;
        (r, bar)
    } else {
        let rows = super::rows::load(&a.source)?;
        let bar = super::progress::rows_bar("vetting", rows.data.rows);
        let r = vet::vet_rows(&pair, &rows, entry, &sources, &criteria, how, &|n| {
            bar.inc(n)
        })?;
        (r, bar)
    };
    bar.finish_and_clear();
    report.notes.splice(0..0, float.notes);

    if let Some(path) = &a.html {
        let page = render_html::render(&report)?;
        write_atomic(path, page.as_bytes())?;
    }
    if a.json {
        super::out::json(&report)?;
    } else {
        let colour = std::io::stdout().is_terminal() && std::env::var_os("NO_COLOR").is_none();
        super::out::emit(&render_text::render(
            &report,
            &TextOptions {
                colour,
                show_rows: a.show,
            },
        ))?;
        if let Some(path) = &a.html {
            super::out::line(&format!("wrote {}", path.display()))?;
        }
    }
    Ok(if report.passed() {
        Outcome::Pass
    } else {
        Outcome::CheckFailed
    })
}
