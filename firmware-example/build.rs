//! Build script of the firmware example.
//!
//! 1. Picks the board (`boards.toml`): the one whose `feature` is enabled (`board-pico`,
//!    `board-microbit-v2`), else the QEMU machine of the compilation target; puts its memory map
//!    into `OUT_DIR/memory.x`, where cortex-m-rt's `link.x` looks for it.
//! 2. Turns the Python reference fixtures in `tests/fixtures/` (numpy / ONNX reference
//!    results) into Rust tables in `OUT_DIR/selftest_cases.rs` for the on-target `selftest`.
//! 3. Parses every packed model the firmware embeds with the runtime's own parser
//!    (`kinglet-runtime` is a build-dependency), reports flash and scratch buffer RAM as cargo warnings,
//!    and fails the build when the board's model budget is exceeded.
//! 4. Takes a model of your own for the `vectors` binary when `KINGLET_OWN_MODEL` (a packed
//!    blob) and `KINGLET_OWN_VECTORS` (its `kinglet score --format vectors --with-inputs`
//!    lines) are set, with `KINGLET_OWN_FEED` (`f32`, `i16` or `u8`; default `f32`): checks
//!    both, counts the blob against the budget and writes `OUT_DIR/own.rs` (README, "Your own
//!    model, step by step").
use serde::Deserialize;
use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

/// The packed models embedded by `kinglet-fw-vectors::assets` (and so by the binaries).
const MODELS: [&str; 9] = [
    "models/digits.kgl",
    "models/digits_float.kgl",
    "models/vibration.kgl",
    "models/lr_digits.kgl",
    "models/lr_digits_float.kgl",
    "models/tanh_digits.kgl",
    "models/tanh_digits_float.kgl",
    "models/int4_digits.kgl",
    "models/digits_int16_input.kgl",
];

#[derive(Deserialize)]
struct Boards {
    board: BTreeMap<String, Board>,
}

#[derive(Deserialize)]
struct Board {
    target: String,
    memory: String,
    /// Cargo feature that selects a development board (absent for the QEMU machines).
    feature: Option<String>,
    /// QEMU machine that emulates the board.
    qemu_machine: Option<String>,
    /// probe-rs chip name of a development board.
    chip: Option<String>,
    model_flash: u64,
    model_ram: u64,
}

fn fail(msg: &str) -> ! {
    eprintln!("error: {msg}");
    println!("cargo:warning={msg}");
    std::process::exit(1);
}

/// A budget from the environment: bytes, or with a `K`/`KiB` or `M`/`MiB` suffix, in the
/// grammar `kinglet budget --flash/--ram` reads (the `kinglet-sizes` crate), at most 4 GiB.
fn env_budget(name: &str) -> Option<u64> {
    println!("cargo:rerun-if-env-changed={name}");
    let raw = std::env::var(name).ok()?;
    match kinglet_sizes::parse(&raw, 1 << 32) {
        Ok(size) => Some(size.bytes),
        Err(e) => fail(&format!("{name}={raw:?}: {e}")),
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
    let boards: Boards =
        toml::from_str(&text).unwrap_or_else(|e| fail(&format!("{}: {e}", boards_path.display())));
    let (name, board) = select_board(&boards, &target);

    // Development boards print through defmt (RTT) instead of semihosting output.
    println!("cargo:rustc-check-cfg=cfg(probe_board)");
    if board.feature.is_some() {
        println!("cargo:rustc-cfg=probe_board");
    }

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
    let own = own_model(&dir, &out);
    if let Some((path, blob, scratch)) = &own {
        println!(
            "cargo:warning={name}: {} (KINGLET_OWN_MODEL): model flash: {blob} bytes, scratch buffer RAM: {scratch} bytes (`kinglet budget`'s model_flash and model_ram)",
            path.display()
        );
        flash += blob;
        ram += scratch;
    }
    for rel in MODELS {
        println!("cargo:rerun-if-changed={rel}");
        let (blob, scratch) = model_footprint(&dir.join(rel));
        println!(
            "cargo:warning={name}: {rel}: model flash: {blob} bytes, scratch buffer RAM: {scratch} bytes"
        );
        flash += blob;
        ram += scratch;
    }
    println!(
        "cargo:warning={name}: all models: model flash: {flash} bytes of {flash_budget} budgeted, \
         scratch RAM: {ram} bytes of {ram_budget} budgeted"
    );
    let mut over = Vec::new();
    if flash > flash_budget {
        over.push(format!(
            "model flash {flash} bytes exceeds the {name} flash budget of {flash_budget} bytes"
        ));
    }
    if ram > ram_budget {
        over.push(format!(
            "scratch buffer RAM {ram} bytes exceeds the {name} RAM budget of {ram_budget} bytes"
        ));
    }
    if !over.is_empty() {
        fail(&format!(
            "model budget exceeded: {} (budgets: boards.toml, KINGLET_FLASH_BUDGET, KINGLET_RAM_BUDGET)",
            over.join("; ")
        ));
    }

    selftest_cases(&dir.join("../tests/fixtures"), &out);

    std::fs::write(
        out.join("board.rs"),
        format!(
            "/// Board this build is for.\npub const BOARD: &str = {name:?};\n\
             /// QEMU machine of the board (`None` on a development board).\n\
             pub const QEMU_MACHINE: Option<&str> = {:?};\n\
             /// probe-rs chip name of the board (`None` on a QEMU machine).\n\
             pub const CHIP: Option<&str> = {:?};\n",
            board.qemu_machine, board.chip
        ),
    )
    .unwrap_or_else(|e| fail(&format!("writing board.rs: {e}")));
}

/// The board of this build: the one whose `feature` is enabled, else the board of `target`
/// without a feature (a QEMU machine). Fails on two board features, on a board feature built
/// for another target, and on a target no board has.
fn select_board<'a>(boards: &'a Boards, target: &str) -> (&'a String, &'a Board) {
    let enabled: Vec<(&String, &Board)> = boards
        .board
        .iter()
        .filter(|(_, b)| {
            b.feature.as_ref().is_some_and(|f| {
                let var = format!("CARGO_FEATURE_{}", f.to_uppercase().replace('-', "_"));
                std::env::var_os(var).is_some()
            })
        })
        .collect();
    match enabled.as_slice() {
        [] => {}
        [(name, board)] => {
            if board.target != target {
                fail(&format!(
                    "board {name} is built for --target {}, not {target:?}",
                    board.target
                ));
            }
            return (name, board);
        }
        more => {
            let names: Vec<&str> = more.iter().map(|(n, _)| n.as_str()).collect();
            fail(&format!(
                "more than one board feature enabled ({names:?}); enable at most one"
            ));
        }
    }
    let Some(found) = boards
        .board
        .iter()
        .find(|(_, b)| b.target == target && b.feature.is_none())
    else {
        let known: Vec<&str> = boards
            .board
            .values()
            .filter(|b| b.feature.is_none())
            .map(|b| b.target.as_str())
            .collect();
        fail(&format!(
            "no board in boards.toml for target {target:?}; build with --target one of {known:?}"
        ));
    };
    found
}

/// A path from the environment, relative to the firmware-example directory unless absolute.
fn env_path(dir: &Path, name: &str) -> Option<PathBuf> {
    println!("cargo:rerun-if-env-changed={name}");
    let raw = std::env::var_os(name).filter(|v| !v.is_empty())?;
    Some(dir.join(raw))
}

/// The model of your own (`KINGLET_OWN_*`): checks it, copies blob and vectors into `OUT_DIR`
/// and writes `own.rs`; returns its path, flash and scratch bytes when one is given.
fn own_model(dir: &Path, out: &Path) -> Option<(PathBuf, u64, u64)> {
    let model = env_path(dir, "KINGLET_OWN_MODEL");
    let vectors = env_path(dir, "KINGLET_OWN_VECTORS");
    println!("cargo:rerun-if-env-changed=KINGLET_OWN_FEED");
    let feed = match std::env::var("KINGLET_OWN_FEED").as_deref() {
        Err(_) | Ok("") | Ok("f32") => "F32",
        Ok("i16") => "I16",
        Ok("u8") => "U8",
        Ok(other) => fail(&format!("KINGLET_OWN_FEED={other:?}: use f32, i16 or u8")),
    };
    let (model, vectors) = match (model, vectors) {
        (None, None) => {
            std::fs::write(
                out.join("own.rs"),
                "/// No model of your own in this build (KINGLET_OWN_MODEL is not set).\n\
                 pub const OWN: Option<OwnSet> = None;\n\
                 /// No scratch buffer for it.\n\
                 pub const OWN_SCRATCH: usize = 0;\n",
            )
            .unwrap_or_else(|e| fail(&format!("writing own.rs: {e}")));
            return None;
        }
        (Some(m), Some(v)) => (m, v),
        _ => fail("set both KINGLET_OWN_MODEL and KINGLET_OWN_VECTORS, or neither"),
    };
    println!("cargo:rerun-if-changed={}", model.display());
    println!("cargo:rerun-if-changed={}", vectors.display());
    let (blob, scratch) = model_footprint(&model);
    let text = std::fs::read_to_string(&vectors).unwrap_or_else(|e| {
        fail(&format!(
            "KINGLET_OWN_VECTORS: reading {}: {e}",
            vectors.display()
        ))
    });
    let lines = text.lines().count();
    if lines == 0 {
        fail(&format!(
            "KINGLET_OWN_VECTORS: {} has no lines",
            vectors.display()
        ));
    }
    if let Some((i, _)) = text
        .lines()
        .enumerate()
        .find(|(_, l)| !l.contains(" feat="))
    {
        fail(&format!(
            "KINGLET_OWN_VECTORS: {} line {} has no inputs: write it with `kinglet score ... --format vectors --with-inputs`",
            vectors.display(),
            i + 1
        ));
    }
    let blob_copy = out.join("own_model.kgl");
    let vectors_copy = out.join("own_vectors.txt");
    std::fs::copy(&model, &blob_copy)
        .unwrap_or_else(|e| fail(&format!("copying {}: {e}", model.display())));
    std::fs::write(&vectors_copy, &text)
        .unwrap_or_else(|e| fail(&format!("writing own_vectors.txt: {e}")));
    std::fs::write(
        out.join("own.rs"),
        format!(
            "/// The model of your own given at build time ({}).\n\
             pub const OWN: Option<OwnSet> = Some(OwnSet {{\n\
             \x20   model: kinglet_runtime::embed_blob!({:?}),\n\
             \x20   vectors: include_str!({:?}),\n\
             \x20   feed: Feed::{feed},\n\
             \x20   lines: {lines},\n\
             }});\n\
             /// Scratch buffer bytes of that model (from its header, read by build.rs).\n\
             pub const OWN_SCRATCH: usize = {scratch};\n",
            model.display(),
            blob_copy.display(),
            vectors_copy.display(),
        ),
    )
    .unwrap_or_else(|e| fail(&format!("writing own.rs: {e}")));
    Some((model, blob, scratch))
}

/// Flash and scratch bytes of one packed model, checked by the runtime's parser.
fn model_footprint(path: &Path) -> (u64, u64) {
    let blob = std::fs::read(path).unwrap_or_else(|e| {
        fail(&format!(
            "reading {}: {e} (regenerate with firmware-example/models/regenerate.sh)",
            path.display()
        ))
    });
    let footprint = match kinglet_runtime::Model::parse(&blob) {
        Ok(m) => (m.blob_bytes() as u64, m.scratch_bytes() as u64),
        Err(e) => fail(&format!("{}: not a valid model: {e}", path.display())),
    };
    footprint
}

/// A reference fixture as a `DenseCase` (see `tests/python/dense_ref.py`).
#[derive(Deserialize)]
struct DenseFixture {
    inputs: usize,
    outputs: usize,
    x: Vec<i8>,
    weights: Vec<i8>,
    bias: Vec<i32>,
    multiplier: Vec<i32>,
    shift: Vec<i8>,
    out_zero_point: i8,
    relu: bool,
    expected: Vec<i8>,
}

#[derive(Deserialize)]
struct SoftmaxFixture {
    logits: Vec<f64>,
    probs: Vec<f64>,
}

fn read_fixture(path: &Path) -> String {
    println!("cargo:rerun-if-changed={}", path.display());
    std::fs::read_to_string(path)
        .unwrap_or_else(|e| fail(&format!("reading {}: {e}", path.display())))
}

/// Rows of a headered CSV fixture, each cell parsed with `parse`.
fn csv_rows<T>(path: &Path, parse: impl Fn(&str, usize) -> Option<T>) -> Vec<Vec<T>> {
    let text = read_fixture(path);
    let mut reader = csv::Reader::from_reader(text.as_bytes());
    let mut rows = Vec::new();
    for (i, rec) in reader.records().enumerate() {
        let rec = rec.unwrap_or_else(|e| fail(&format!("{}: row {}: {e}", path.display(), i + 1)));
        let row: Vec<T> = rec
            .iter()
            .enumerate()
            .map(|(col, cell)| {
                parse(cell, col).unwrap_or_else(|| {
                    fail(&format!(
                        "{}: row {}, column {}: bad value {cell:?}",
                        path.display(),
                        i + 1,
                        col + 1
                    ))
                })
            })
            .collect();
        rows.push(row);
    }
    rows
}

fn bytes_of<T: Copy, const N: usize>(v: &[T], to: impl Fn(T) -> [u8; N]) -> String {
    let b: Vec<String> = v
        .iter()
        .flat_map(|&x| to(x))
        .map(|b| b.to_string())
        .collect();
    format!("&[{}]", b.join(","))
}

/// Writes `selftest_cases.rs`: requantisation, QuantizeLinear, int8 dense and softmax cases
/// from the Python reference fixtures, as static tables.
fn selftest_cases(fixtures: &Path, out: &Path) {
    let mut src = String::from("// Generated by build.rs from tests/fixtures; do not edit.\n");

    let requant = csv_rows(&fixtures.join("requant_cases.csv"), |c, _| {
        c.parse::<i64>().ok()
    });
    src += "/// (acc, multiplier, shift, zero_point, act_min, act_max, expected)\n";
    src += "pub static REQUANT: &[(i32, i32, i8, i8, i8, i8, i8)] = &[\n";
    for r in &requant {
        if r.len() != 7 {
            fail("requant_cases.csv: expected 7 columns");
        }
        src += &format!(
            "({},{},{},{},{},{},{}),\n",
            r[0], r[1], r[2], r[3], r[4], r[5], r[6]
        );
    }
    src += "];\n";

    // x and scale are float32 values printed as Python floats: parse as f64, cast to f32.
    let qlin = csv_rows(&fixtures.join("quantize_linear_cases.csv"), |c, _| {
        c.parse::<f64>().ok()
    });
    src += "/// (x bits, scale bits, zero_point, expected)\n";
    src += "pub static QUANTIZE_LINEAR: &[(u32, u32, i8, i8)] = &[\n";
    for r in &qlin {
        if r.len() != 4 {
            fail("quantize_linear_cases.csv: expected 4 columns");
        }
        src += &format!(
            "({:#x},{:#x},{},{}),\n",
            (r[0] as f32).to_bits(),
            (r[1] as f32).to_bits(),
            r[2] as i8,
            r[3] as i8
        );
    }
    src += "];\n";

    let path = fixtures.join("dense_int8_cases.json");
    let dense: Vec<DenseFixture> = serde_json::from_str(&read_fixture(&path))
        .unwrap_or_else(|e| fail(&format!("{}: {e}", path.display())));
    src += "pub static DENSE: &[DenseCase] = &[\n";
    for d in &dense {
        src += &format!(
            "DenseCase {{ inputs: {}, outputs: {}, x: {}, weights: {}, bias: {}, multiplier: {}, \
             shift: {}, zero_point: {}, relu: {}, expected: &{:?} }},\n",
            d.inputs,
            d.outputs,
            bytes_of(&d.x, |v: i8| v.to_le_bytes()),
            bytes_of(&d.weights, |v: i8| v.to_le_bytes()),
            bytes_of(&d.bias, i32::to_le_bytes),
            bytes_of(&d.multiplier, i32::to_le_bytes),
            bytes_of(&d.shift, |v: i8| v.to_le_bytes()),
            d.out_zero_point,
            d.relu,
            d.expected
        );
    }
    src += "];\n";

    let path = fixtures.join("softmax_cases.json");
    let soft: Vec<SoftmaxFixture> = serde_json::from_str(&read_fixture(&path))
        .unwrap_or_else(|e| fail(&format!("{}: {e}", path.display())));
    src += "/// (logits as f32 bits, float64 reference probabilities)\n";
    src += "pub static SOFTMAX: &[(&[u32], &[f64])] = &[\n";
    for s in &soft {
        let bits: Vec<String> = s
            .logits
            .iter()
            .map(|&l| format!("{:#x}", (l as f32).to_bits()))
            .collect();
        let probs: Vec<String> = s.probs.iter().map(|p| format!("{p:?}")).collect();
        src += &format!("(&[{}], &[{}]),\n", bits.join(","), probs.join(","));
    }
    src += "];\n";

    std::fs::write(out.join("selftest_cases.rs"), src)
        .unwrap_or_else(|e| fail(&format!("writing selftest_cases.rs: {e}")));
}
