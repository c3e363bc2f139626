//! `kb-gen`: the host side of the kernel benchmark.
//!
//! - `kb-gen synth DIR` writes the synthetic one-layer blobs (seeded random weights), each in
//!   the shipped `Blocked4x4` layout (through the runtime's encoder and `dense::layout`, as
//!   the packer does) and as an output-major twin `*.om.kgl` with the same numbers;
//! - `kb-gen twin IN OUT` writes the output-major twin of a packed blob;
//! - `kb-gen text-size ELF` prints the bytes of the ELF's `.text` section;
//! - `kb-gen soft-routines ELF` lists the software float and division routines it links;
//! - `kb-gen report ...` pairs the firmware's `kb` lines with the plugin's counts and prints
//!   the tables (see `report.rs`).
mod blobs;
mod report;

use std::process::ExitCode;

fn main() -> ExitCode {
    let args: Vec<String> = std::env::args().skip(1).collect();
    let result = match args.first().map(String::as_str) {
        Some("synth") if args.len() == 2 => blobs::synth(&args[1]),
        Some("twin") if args.len() == 3 => blobs::twin_file(&args[1], &args[2]),
        Some("text-size") if args.len() == 2 => text_size(&args[1]).map(|n| println!("{n}")),
        Some("soft-routines") if args.len() == 2 => {
            soft_routines(&args[1]).map(|v| v.iter().for_each(|n| println!("{n}")))
        }
        Some("report") => report::run(&args[1..]),
        _ => Err("usage: kb-gen synth DIR | twin IN OUT | text-size ELF | soft-routines ELF | report ...".into()),
    };
    match result {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            eprintln!("kb-gen: {e}");
            ExitCode::FAILURE
        }
    }
}

/// Size of the `.text` section of an ELF file.
fn text_size(path: &str) -> Result<u64, String> {
    use object::{Object, ObjectSection};
    let data = std::fs::read(path).map_err(|e| format!("{path}: {e}"))?;
    let file = object::File::parse(&*data).map_err(|e| format!("{path}: {e}"))?;
    let text = file
        .section_by_name(".text")
        .ok_or(format!("{path}: no .text section"))?;
    Ok(text.size())
}

/// Software float and integer-division routines (compiler-builtins, libm) the ELF links: what
/// an integer-only path on a core without FPU or divider must not pull in.
fn soft_routines(path: &str) -> Result<Vec<String>, String> {
    use object::{Object, ObjectSymbol};
    let data = std::fs::read(path).map_err(|e| format!("{path}: {e}"))?;
    let file = object::File::parse(&*data).map_err(|e| format!("{path}: {e}"))?;
    // The `__aeabi_*` entry points and compiler-builtins' own (v0-mangled) names.
    let soft = |n: &str| {
        let aeabi = n.strip_prefix("__aeabi_").unwrap_or("");
        aeabi.starts_with('f')
            || aeabi.starts_with('d')
            || aeabi.ends_with("2f")
            || aeabi.contains("div")
            || [
                "sf3", "df3", "sf2", "df2", "divsi3", "divdi3", "modsi3", "moddi3",
            ]
            .iter()
            .any(|e| n.contains(e))
            || n.contains("specialized_div_rem")
            || n.contains("4libm4math")
    };
    // Code symbols only: the file symbols carry codegen-unit hashes ("...-cgu.0") that can
    // contain any of the patterns (a hash with "df3" in it was one).
    let mut found: Vec<String> = file
        .symbols()
        .filter(|sym| sym.kind() == object::SymbolKind::Text)
        .filter_map(|sym| sym.name().ok().map(str::to_owned))
        .filter(|n| soft(n))
        .collect();
    found.sort();
    found.dedup();
    Ok(found)
}
