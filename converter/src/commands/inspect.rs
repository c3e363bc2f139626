//! `kinglet inspect`: report on a packed blob.
use anyhow::{anyhow, bail, Context, Result};
use kinglet_converter::report::{table, BlobReport};
use kinglet_runtime::Model;
use std::path::PathBuf;

use super::Outcome;

/// The highest clock `--clock-mhz` takes: far above any Cortex-M part (common practice, no
/// source: the fastest Cortex-M7 parts run near 1 GHz).
const MAX_CLOCK_MHZ: f64 = 10_000.0;

/// The size of a Cortex-M address space: `--load-address` and the blob must fit below it.
const ADDRESS_SPACE: u64 = 1 << 32;

/// Arguments of `kinglet inspect`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The packed model (`.kgl`).
    blob: PathBuf,
    /// Print JSON instead of tables.
    #[arg(long)]
    json: bool,
    /// Turn the instruction estimates into a latency range at this core clock, in MHz (greater
    /// than 0, at most 10000), with the cycles-per-instruction assumption stated.
    #[arg(long, value_name = "MHZ", value_parser = parse_clock, allow_negative_numbers = true)]
    clock_mhz: Option<f64>,
    /// Say whether the weights are 4-byte aligned (what the Cortex-M4 kernels need) when the
    /// blob's first byte sits at this address (hex `0x…` or decimal, below 2^32).
    #[arg(long, value_name = "ADDRESS", value_parser = parse_address, allow_negative_numbers = true)]
    load_address: Option<u64>,
}

fn parse_clock(s: &str) -> Result<f64, String> {
    match s.trim().parse::<f64>() {
        Ok(v) if v.is_finite() && v > 0.0 && v <= MAX_CLOCK_MHZ => Ok(v),
        _ => Err(format!(
            "expected a clock in MHz, greater than 0 and at most {MAX_CLOCK_MHZ}"
        )),
    }
}

fn parse_address(s: &str) -> Result<u64, String> {
    let t = s.trim();
    let parsed = match t.strip_prefix("0x").or_else(|| t.strip_prefix("0X")) {
        Some(hex) => u64::from_str_radix(hex, 16),
        None => t.parse::<u64>(),
    };
    let beyond = || "the address is beyond the 32-bit address space of a Cortex-M core".to_string();
    match parsed {
        Ok(v) if v < ADDRESS_SPACE => Ok(v),
        Ok(_) => Err(beyond()),
        Err(e) if *e.kind() == std::num::IntErrorKind::PosOverflow => Err(beyond()),
        Err(_) => Err("expected an address: hex (0x08004000) or decimal digits".into()),
    }
}

pub fn run(a: Args) -> Result<Outcome> {
    let bytes =
        std::fs::read(&a.blob).with_context(|| format!("cannot read {}", a.blob.display()))?;
    let model = Model::parse(&bytes).map_err(|e| anyhow!("{}: {e}", a.blob.display()))?;
    let mut report = BlobReport::of(&model);
    if let Some(mhz) = a.clock_mhz {
        report = report.at_clock(mhz);
    }
    if let Some(address) = a.load_address {
        if address + bytes.len() as u64 > ADDRESS_SPACE {
            bail!(
                "--load-address {address:#x}: the {} bytes of {} would run past the end of the 32-bit address space",
                bytes.len(),
                a.blob.display()
            );
        }
        report = report.at_load_address(&model, address);
    }
    if a.json {
        super::out::line(&serde_json::to_string_pretty(&report)?)?;
    } else {
        super::out::emit(&table::render(&report))?;
    }
    Ok(Outcome::Pass)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn clock_and_address_parsers_take_what_they_say() {
        assert_eq!(parse_clock("64"), Ok(64.0));
        assert_eq!(parse_clock("0.032"), Ok(0.032));
        for bad in ["0", "-1", "nan", "inf", "10001", "fast", ""] {
            assert!(parse_clock(bad).is_err(), "{bad}");
        }
        assert_eq!(parse_address("0x08004000"), Ok(0x0800_4000));
        assert_eq!(parse_address("0X1"), Ok(1));
        assert_eq!(parse_address("536870912"), Ok(0x2000_0000));
        assert_eq!(parse_address("0xFFFFFFFF"), Ok(0xFFFF_FFFF));
        for bad in [
            "0x100000000",
            "4294967296",
            "0x",
            "0x8g",
            "-4",
            "flash",
            "",
            "9".repeat(30).as_str(),
        ] {
            assert!(parse_address(bad).is_err(), "{bad}");
        }
    }
}
