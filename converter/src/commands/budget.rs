//! `kinglet budget`: does a packed model fit a part's flash and RAM?
use anyhow::{anyhow, bail, Context, Result};
use kinglet_converter::fit::{self, profile, render, Core, RuntimeBuild, Target};
use kinglet_runtime::Model;
use std::path::PathBuf;

use super::Outcome;

/// `--flash` and `--ram`: bytes or `K`/`M` suffixes, at most [`fit::MAX_BYTES`].
fn part_size(s: &str) -> Result<u64, String> {
    fit::size::parse(s, fit::MAX_BYTES)
}

/// A size in the unit it reads best in: whole KiB where it is one.
fn show_size(bytes: u64) -> String {
    if bytes.is_multiple_of(1024) {
        format!("{} KiB", bytes / 1024)
    } else {
        format!("{bytes} bytes")
    }
}

/// Arguments of `kinglet budget`.
#[derive(Debug, clap::Args)]
#[command(group(clap::ArgGroup::new("part").required(true).args(["board", "flash"])))]
pub struct Args {
    /// The packed model (`.kgl`).
    blob: PathBuf,
    /// A built-in part profile: m0-16k, m0plus-32k, m4f-64k, m4f-128k, m4f-256k, m4f-320k.
    #[arg(long, conflicts_with_all = ["flash", "ram", "core"])]
    board: Option<String>,
    /// Flash of a custom part (with --ram): bytes, or with a suffix, 256K, 256KiB, 1M (at most
    /// 4 GiB, what a Cortex-M addresses).
    #[arg(long, requires = "ram", value_name = "SIZE", value_parser = part_size)]
    flash: Option<u64>,
    /// RAM of a custom part (with --flash): bytes, or 32K, 32KiB (at most 4 GiB).
    #[arg(long, requires = "flash", value_name = "SIZE", value_parser = part_size)]
    ram: Option<u64>,
    /// Core of a custom part, for the measured runtime code and stack [default: m0, the larger]
    #[arg(long, value_enum, requires = "flash")]
    core: Option<Core>,
    /// The runtime build the firmware links: its code and stack differ (measured per build)
    #[arg(long, value_enum, default_value_t = RuntimeBuild::Default)]
    runtime: RuntimeBuild,
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
            build: a.runtime,
        });
    }
    let (Some(flash), Some(ram)) = (a.flash, a.ram) else {
        bail!("give --board, or both --flash and --ram");
    };
    let core = a.core.unwrap_or(Core::M0);
    Ok(Target {
        profile: "custom".into(),
        part: format!(
            "{}, {} flash, {} RAM",
            core.name(),
            show_size(flash),
            show_size(ram)
        ),
        core,
        flash,
        ram,
        stack: a.stack,
        build: a.runtime,
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
            "16K",
            "--ram",
            "8K",
            "--json",
        ]);
        assert!(matches!(run(a.unwrap()).unwrap(), Outcome::CheckFailed));
    }

    #[test]
    fn profile_or_sizes_are_required_and_exclusive() {
        assert!(parse(&["m.kgl"]).is_err());
        let e = parse(&["m.kgl", "--flash", "64K"]).unwrap_err().to_string();
        let missing = e.split("Usage:").next().unwrap_or_default();
        assert!(
            missing.contains("--ram") && !missing.contains("--board"),
            "{e}"
        );
        assert!(parse(&["m.kgl", "--board", "m0-16k", "--ram", "8K"]).is_err());
        let a = parse(&["m.kgl", "--flash", "64K", "--ram", "8192", "--core", "m4f"]).unwrap();
        let t = target(&a).unwrap();
        assert_eq!((t.flash, t.ram, t.core), (65536, 8192, Core::M4f));
        assert_eq!(t.part, "Cortex-M4F, 64 KiB flash, 8 KiB RAM");
        let t = target(&parse(&["m.kgl", "--flash", "0.5M", "--ram", "1536"]).unwrap()).unwrap();
        assert_eq!((t.flash, t.ram), (512 * 1024, 1536));
        for too_big in ["18446744073709551615", "4294967297"] {
            assert!(parse(&["m.kgl", "--board", "m0-16k", "--stack", too_big]).is_err());
        }
        assert!(parse(&["m.kgl", "--board", "m0-16k", "--stack", "4294967296"]).is_ok());
        assert!(parse(&["m.kgl", "--flash", "4194305K", "--ram", "8K"]).is_err());
        assert!(parse(&["m.kgl", "--flash", "64K", "--ram", "0"]).is_err());
        assert!(parse(&["m.kgl", "--flash", "64", "--ram", "8K"]).is_err());
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
