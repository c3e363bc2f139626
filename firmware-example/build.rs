//! Build script of the firmware example.
//!
//! 1. Picks the board from the compilation target (`boards.toml`) and puts its memory map into
//!    `OUT_DIR/memory.x`, where cortex-m-rt's `link.x` looks for it.
//! 2. Parses every packed model the firmware embeds with the runtime's own parser
//!    (`kinglet-runtime` is a build-dependency), reports flash and arena RAM as cargo warnings,
//!    and fails the build when the board's model budget is exceeded.
use serde::Deserialize;
use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

/// The packed models embedded by `kinglet-fw-vectors::assets` (and so by the binaries).
const MODELS: [&str; 3] = [
    "models/digits.kgl",
    "models/digits_float.kgl",
    "models/vibration.kgl",
];

#[derive(Deserialize)]
struct Boards {
    board: BTreeMap<String, Board>,
}

#[derive(Deserialize)]
struct Board {
    target: String,
    memory: String,
    qemu_machine: String,
    model_flash: u64,
    model_ram: u64,
}

fn fail(msg: &str) -> ! {
    eprintln!("error: {msg}");
    println!("cargo:warning={msg}");
    std::process::exit(1);
}

/// A budget from the environment: bytes, or KiB with a `K`/`KiB` suffix.
fn env_budget(name: &str) -> Option<u64> {
    println!("cargo:rerun-if-env-changed={name}");
    let raw = std::env::var(name).ok()?;
    let s = raw.trim();
    let (digits, mult) = if let Some(k) = s.strip_suffix("KiB").or_else(|| s.strip_suffix('K')) {
        (k.trim(), 1024)
    } else {
        (s, 1)
    };
    match digits.parse::<u64>() {
        Ok(v) => Some(v * mult),
        Err(_) => fail(&format!(
            "{name}={raw:?} is not a byte count (use e.g. 4096 or 4K)"
        )),
    }
}

fn main() {
    let dir = PathBuf::from(std::env::var("CARGO_MANIFEST_DIR").unwrap_or_default());
    let out = PathBuf::from(std::env::var("OUT_DIR").unwrap_or_default());
    let target = std::env::var("TARGET").unwrap_or_default();
    println!("cargo:rerun-if-changed=boards.toml");
    println!("cargo:rerun-if-changed=memory");

    let boards_path = dir.join("boards.toml");
    let text = std::fs::read_to_string(&boards_path)
        .unwrap_or_else(|e| fail(&format!("reading {}: {e}", boards_path.display())));
    let boards: Boards = toml::from_str(&text)
        .unwrap_or_else(|e| fail(&format!("{}: {e}", boards_path.display())));
    let Some((name, board)) = boards.board.iter().find(|(_, b)| b.target == target) else {
        let known: Vec<&str> = boards.board.values().map(|b| b.target.as_str()).collect();
        fail(&format!(
            "no board in boards.toml for target {target:?}; build with --target one of {known:?}"
        ));
    };

    // Memory map.
    let memory = dir.join(&board.memory);
    let map = std::fs::read(&memory)
        .unwrap_or_else(|e| fail(&format!("reading {}: {e}", memory.display())));
    std::fs::write(out.join("memory.x"), map)
        .unwrap_or_else(|e| fail(&format!("writing memory.x: {e}")));
    println!("cargo:rerun-if-changed={}", board.memory);
    println!("cargo:rustc-link-search={}", out.display());
    println!("cargo:rustc-link-arg-bins=-Tlink.x");
    if std::env::var_os("CARGO_FEATURE_DEFMT").is_some() {
        println!("cargo:rustc-link-arg-bins=-Tdefmt.x");
    }

    // Model budget.
    let flash_budget = env_budget("KINGLET_FLASH_BUDGET").unwrap_or(board.model_flash);
    let ram_budget = env_budget("KINGLET_RAM_BUDGET").unwrap_or(board.model_ram);
    let (mut flash, mut ram) = (0u64, 0u64);
    for rel in MODELS {
        println!("cargo:rerun-if-changed={rel}");
        let (blob, arena) = model_footprint(&dir.join(rel));
        println!(
            "cargo:warning={name}: {rel}: model flash: {blob} bytes, arena RAM: {arena} bytes"
        );
        flash += blob;
        ram += arena;
    }
    println!(
        "cargo:warning={name}: all models: model flash: {flash} bytes of {flash_budget} budgeted, \
         arena RAM: {ram} bytes of {ram_budget} budgeted"
    );
    let mut over = Vec::new();
    if flash > flash_budget {
        over.push(format!(
            "model flash {flash} bytes exceeds the {name} flash budget of {flash_budget} bytes"
        ));
    }
    if ram > ram_budget {
        over.push(format!(
            "arena RAM {ram} bytes exceeds the {name} RAM budget of {ram_budget} bytes"
        ));
    }
    if !over.is_empty() {
        fail(&format!(
            "model budget exceeded: {} (budgets: boards.toml, KINGLET_FLASH_BUDGET, KINGLET_RAM_BUDGET)",
            over.join("; ")
        ));
    }

    std::fs::write(
        out.join("board.rs"),
        format!(
            "/// Board this build is for.\npub const BOARD: &str = {name:?};\n\
             /// QEMU machine of the board.\npub const QEMU_MACHINE: &str = {:?};\n",
            board.qemu_machine
        ),
    )
    .unwrap_or_else(|e| fail(&format!("writing board.rs: {e}")));
}

/// Flash and arena bytes of one packed model, checked by the runtime's parser.
fn model_footprint(path: &Path) -> (u64, u64) {
    let blob = std::fs::read(path).unwrap_or_else(|e| {
        fail(&format!(
            "reading {}: {e} (regenerate with firmware-example/models/regenerate.sh)",
            path.display()
        ))
    });
    let footprint = match kinglet_runtime::Model::parse(&blob) {
        Ok(m) => (m.blob_bytes() as u64, m.arena_bytes() as u64),
        Err(e) => fail(&format!("{}: not a valid model: {e}", path.display())),
    };
    footprint
}
