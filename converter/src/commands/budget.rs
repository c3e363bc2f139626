//! `kinglet budget`: does a packed model fit a part's flash and RAM?
use anyhow::{anyhow, bail, Context, Result};
use kinglet_converter::fit::{self, profile, render, Core, Target};
use kinglet_runtime::Model;
use std::path::PathBuf;

use super::Outcome;

/// The bound on `--flash` and `--ram`, in KiB: [`fit::MAX_BYTES`].
const MAX_KIB: u64 = fit::MAX_BYTES / 1024;

/// Arguments of `kinglet budget`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The packed model (`.kgl`).
    blob: PathBuf,
    /// A built-in part profile: m0-16k, m0plus-32k, m4f-64k, m4f-128k, m4f-256k, m4f-320k.
    #[arg(long, conflicts_with_all = ["flash", "ram", "core"], required_unless_present_all = ["flash", "ram"])]
    board: Option<String>,
    /// Flash of a custom part, in KiB (with --ram; at most 4194304, the 4 GiB a Cortex-M addresses).
    #[arg(long, requires = "ram", value_parser = clap::value_parser!(u64).range(1..=MAX_KIB))]
    flash: Option<u64>,
    /// RAM of a custom part, in KiB (with --flash; at most 4194304).
    #[arg(long, requires = "flash", value_parser = clap::value_parser!(u64).range(1..=MAX_KIB))]
    ram: Option<u64>,
    /// Core of a custom part, for the measured runtime code and stack [default: m0, the larger]
    #[arg(long, value_enum, requires = "flash")]
    core: Option<Core>,
    /// Stack bytes to reserve instead of the runtime's measured peak (at most 4294967296).
    #[arg(long, value_parser = clap::value_parser!(u64).range(0..=fit::MAX_BYTES))]
    stack: Option<u64>,
    /// Print JSON instead of a table.
    #[arg(long)]
    json: bool,
}

fn target(a: &Args) -> Result<Target> {
    if let Some(name) = &a.board {
        let p = profile::find(name).ok_or_else(|| {
            anyhow!(
                "unknown board profile {name:?}; known: {}",
                profile::names()
            )
        })?;
        return Ok(Target {
            profile: p.name.into(),
            part: format!(
                "{}, {} KiB flash, {} KiB RAM: {}",
                p.core.name(),
                p.flash_kib,
                p.ram_kib,
                p.note
            ),
            core: p.core,
            flash: p.flash_kib * 1024,
            ram: p.ram_kib * 1024,
            stack: a.stack,
        });
    }
    let (Some(flash), Some(ram)) = (a.flash, a.ram) else {
        bail!("give --board, or both --flash and --ram");
    };
    let core = a.core.unwrap_or(Core::M0);
    Ok(Target {
        profile: "custom".into(),
        part: format!("{}, {flash} KiB flash, {ram} KiB RAM", core.name()),
        core,
        flash: flash.checked_mul(1024).context("--flash is too large")?,
        ram: ram.checked_mul(1024).context("--ram is too large")?,
        stack: a.stack,
    })
}

pub fn run(a: Args) -> Result<Outcome> {
    let t = target(&a)?;
    let bytes =
        std::fs::read(&a.blob).with_context(|| format!("cannot read {}", a.blob.display()))?;
    let model = Model::parse(&bytes).map_err(|e| anyhow!("{}: {e}", a.blob.display()))?;
    let b = fit::budget(&a.blob.display().to_string(), &model, &t)?;
    let text = if a.json {
        serde_json::to_string_pretty(&render::json(&b))? + "\n"
    } else {
        render::table(&b)
    };
    super::out::emit(&text)?;
    Ok(if b.fits() {
        Outcome::Pass
    } else {
        Outcome::CheckFailed
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use clap::Parser;

    #[derive(Parser)]
    struct Cli {
        #[command(flatten)]
        args: Args,
    }

    fn parse(argv: &[&str]) -> Result<Args, clap::Error> {
        Cli::try_parse_from(std::iter::once("budget").chain(argv.iter().copied())).map(|c| c.args)
    }

    fn blob(name: &str) -> String {
        format!(
            "{}/../firmware-example/models/{name}",
            env!("CARGO_MANIFEST_DIR")
        )
    }

    #[test]
    fn fits_passes_and_too_small_is_a_failed_check() {
        let ok = run(parse(&[&blob("digits.kgl"), "--board", "m0-16k"]).unwrap()).unwrap();
        assert!(matches!(ok, Outcome::Pass));
        let a = parse(&[
            &blob("digits_float.kgl"),
            "--flash",
            "16",
            "--ram",
            "8",
            "--json",
        ]);
        assert!(matches!(run(a.unwrap()).unwrap(), Outcome::CheckFailed));
    }

    #[test]
    fn profile_or_sizes_are_required_and_exclusive() {
        assert!(parse(&["m.kgl"]).is_err());
        assert!(parse(&["m.kgl", "--flash", "64"]).is_err());
        assert!(parse(&["m.kgl", "--board", "m0-16k", "--ram", "8"]).is_err());
        let a = parse(&["m.kgl", "--flash", "64", "--ram", "8", "--core", "m4f"]).unwrap();
        let t = target(&a).unwrap();
        assert_eq!((t.flash, t.ram, t.core), (65536, 8192, Core::M4f));
        for too_big in ["18446744073709551615", "4294967297"] {
            assert!(parse(&["m.kgl", "--board", "m0-16k", "--stack", too_big]).is_err());
        }
        assert!(parse(&["m.kgl", "--board", "m0-16k", "--stack", "4294967296"]).is_ok());
        assert!(parse(&["m.kgl", "--flash", "4194305", "--ram", "8"]).is_err());
        assert!(parse(&["m.kgl", "--flash", "64", "--ram", "0"]).is_err());
        let e = target(&parse(&["m.kgl", "--board", "m9-1k"]).unwrap()).unwrap_err();
        assert!(format!("{e}").contains("m4f-64k"), "{e}");
    }

    #[test]
    fn unreadable_or_invalid_blob_is_an_error_with_the_path() {
        let e = run(parse(&["/nonexistent/m.kgl", "--board", "m0-16k"]).unwrap())
            .err()
            .unwrap();
        assert!(format!("{e:#}").contains("/nonexistent/m.kgl"));
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("bad.kgl");
        std::fs::write(&p, b"KGLT not really").unwrap();
        let e = run(parse(&[p.to_str().unwrap(), "--board", "m0-16k"]).unwrap())
            .err()
            .unwrap();
        assert!(format!("{e:#}").contains("bad.kgl"), "{e:#}");
    }
}
