//! `kb-harness`: the one measurement harness. `bash scripts/kernel-bench.sh [--check|--write]`
//! builds and runs it.
//!
//! One run builds every probe once — the benchmark firmware and the stack probe
//! (`kernel-bench/fw`), the code-size probes (`kernel-bench/size`, int8-only and with `f32`),
//! the example firmware's `size_base`/`size_runtime` — on the Cortex-M4F and the Cortex-M0,
//! runs them under QEMU, and measures instruction counts (our TCG plugin,
//! `kernel-bench/plugin/kcount.c`), code size (the ELF files) and stack (paint and lowest stack
//! pointer, [`stack`]) once. From that run it renders every published measurement
//! ([`consumers`]): the tables of BENCHMARKS.md, `converter/src/fit/measured.rs` and the rates
//! in `converter/src/report/cycles.rs`.
//!
//! - no option: print the tables and goals; say which consumer disagrees;
//! - `--check`: fail when the on-target self-check fails, a goal regresses by more than
//!   [`goals::MARGIN`], or a consumer disagrees with the run (instruction counts by more than
//!   the margin, anything else at all);
//! - `--write`: write the consumers.
mod bench;
mod blobs;
mod consumers;
mod elf;
mod goals;
mod rates;
mod render;
mod stack;
mod steps;

use elf::Elf;
use std::io::BufReader;
use std::path::Path;
use std::process::{ExitCode, Stdio};
use steps::{Machine, Paths};

/// Everything measured on one target.
pub struct Target {
    /// `m4` or `m0`.
    pub name: &'static str,
    /// Rust target triple.
    pub triple: &'static str,
    /// The benchmark firmware's counts and self-check.
    pub bench: bench::Run,
    /// Runtime `.text` with default features (int8 and f32 models), int8 inference probe.
    pub size: u64,
    /// Runtime `.text` without the `f32` feature (int8 models only), the same probe.
    pub size_int8_only: u64,
    /// Runtime `.text` without the `f32` feature, parse + `Model::classify` from `u8`.
    pub size_classify: u64,
    /// Software float and division routines the classify probe links (should be none).
    pub classify_soft: Vec<String>,
    /// Runtime `.rodata` of the int8-only `infer` probe (`size_infer` − `size_base`).
    pub rodata_int8_only: u64,
    /// Runtime `.rodata` of the `classify` probe.
    pub rodata_classify: u64,
    /// The stack probe's calls.
    pub stack: stack::Probe,
    /// Runtime `.text` in the example firmware (`size_runtime` − `size_base`).
    pub footprint_text: u64,
    /// Runtime `.rodata` in the example firmware, blob excluded.
    pub footprint_rodata: u64,
}

#[derive(Clone, Copy, PartialEq)]
enum Mode {
    Print,
    Check,
    Write,
}

fn main() -> ExitCode {
    let args: Vec<String> = std::env::args().skip(1).collect();
    let mode = match args.iter().map(String::as_str).collect::<Vec<_>>()[..] {
        [] => Mode::Print,
        ["--check"] => Mode::Check,
        ["--write"] => Mode::Write,
        _ => {
            eprintln!("usage: kb-harness [--check | --write]");
            return ExitCode::from(2);
        }
    };
    // The repository: this crate is `kernel-bench/harness`.
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("../..");
    let root = root.canonicalize().unwrap_or(root);
    match run(&Paths::new(&root), mode) {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            eprintln!("kb-harness: {e}");
            ExitCode::FAILURE
        }
    }
}

fn step(what: &str) {
    static START: std::sync::OnceLock<std::time::Instant> = std::sync::OnceLock::new();
    let t = START
        .get_or_init(std::time::Instant::now)
        .elapsed()
        .as_secs();
    println!("== {what} (at {t} s)");
}

fn run(p: &Paths, mode: Mode) -> Result<(), String> {
    let blobs = p.out.join("blobs");
    std::fs::create_dir_all(&blobs).map_err(|e| format!("{}: {e}", blobs.display()))?;
    step("building the packer and the plugin");
    steps::cargo(
        &p.root,
        &p.root_target,
        &["-p", "kinglet-converter", "--bin", "kinglet"],
        &[],
    )?;
    let plugin = p.out.join("kcount.so");
    steps::run(
        "gcc (the plugin)",
        std::process::Command::new("gcc")
            .args([
                "-shared", "-fPIC", "-O2", "-Wall", "-Wextra", "-Werror", "-o",
            ])
            .arg(&plugin)
            .arg(p.root.join("kernel-bench/plugin/kcount.c")),
    )?;
    step("blobs: synthetic layers (seeded) and the examples, packed by kinglet");
    let shapes = make_blobs(p, &blobs)?;
    let mut targets = Vec::new();
    for m in &steps::MACHINES {
        targets.push(measure(p, m, &blobs, &plugin)?);
    }
    let fitted = rates::all(&targets, &shapes)?;
    let estimates = rates::check(&targets, &shapes, &fitted)?;
    let results = render::results(&targets, &estimates);
    let footprint = render::footprint(&targets);
    println!(
        "== results (QEMU {}, {})\n",
        steps::qemu_version()?,
        steps::rustc_version()?
    );
    println!("{}", render::plain(&results));
    println!("{}", render::plain(&footprint));
    let parts = [
        consumers::Part {
            file: "BENCHMARKS.md",
            region: Some("results"),
            fresh: results,
        },
        consumers::Part {
            file: "BENCHMARKS.md",
            region: Some("footprint"),
            fresh: footprint,
        },
        consumers::Part {
            file: "converter/src/fit/measured.rs",
            region: None,
            fresh: render::measured(&targets, &steps::rustc_version()?),
        },
        consumers::Part {
            file: "converter/src/report/cycles.rs",
            region: Some("rates"),
            fresh: render::rates(&fitted),
        },
    ];
    let c = consumers::Consumers::new(&p.root);
    if mode == Mode::Write {
        c.write(&parts)?;
        println!(
            "wrote BENCHMARKS.md, converter/src/fit/measured.rs, converter/src/report/cycles.rs"
        );
    }
    let stale = c.check(&parts)?;
    for s in &stale {
        println!("consumer differs from this run: {s}");
    }
    if stale.is_empty() {
        println!("every consumer agrees with this run");
    }
    let failed: u64 = targets.iter().map(|t| t.bench.failed).sum();
    let passed: u64 = targets.iter().map(|t| t.bench.passed).sum();
    if failed > 0 || passed == 0 {
        return Err("the on-target self-check failed".into());
    }
    let off: Vec<String> = estimates
        .iter()
        .filter(|e| !e.ok())
        .map(|e| {
            format!(
                "{} {} ({}): estimate {} vs measured {} ({:+.1}%)",
                e.target,
                e.model,
                e.feed.name(),
                e.estimated,
                e.measured,
                100.0 * e.error()
            )
        })
        .collect();
    for o in &off {
        println!(
            "estimate off by more than {:.0}%: {o}",
            100.0 * rates::cycles::TOLERANCE
        );
    }
    if mode == Mode::Check {
        let missed = goals::goals(&targets).iter().filter(|g| g.fails()).count();
        if missed > 0 {
            return Err(format!("{missed} goal(s) missed by more than the margin"));
        }
        if !off.is_empty() {
            return Err(format!(
                "{} whole-model estimate(s) off by more than {:.0}%",
                off.len(),
                100.0 * rates::cycles::TOLERANCE
            ));
        }
        if !stale.is_empty() {
            return Err(format!(
                "{} consumer(s) disagree with the measurement: run bash scripts/kernel-bench.sh --write and review the diff",
                stale.len()
            ));
        }
    }
    Ok(())
}

/// Writes the blobs the firmware embeds; returns the shapes of every model the benchmark runs.
fn make_blobs(p: &Paths, blobs: &Path) -> Result<rates::Shapes, String> {
    let dir = blobs.to_str().ok_or("non-UTF-8 target directory")?;
    blobs::synth(dir)?;
    let kinglet = p.root_target.join("release/kinglet");
    let ex = p.root.join("examples");
    // The int8 blobs keep the integer input path: the benchmark and stack probes feed them
    // raw i16/u8 samples as well as f32 features.
    let packs: [(&str, &[&str]); 6] = [
        (
            "digits",
            &["--calibration", "digits/calibration.csv", "--integer-input"],
        ),
        (
            "vibration",
            &[
                "--calibration",
                "vibration/calibration.csv",
                "--integer-input",
            ],
        ),
        // int4 weights on every layer, f32 features only: the int4 estimate's whole-model check.
        (
            "digits_int4",
            &[
                "--calibration",
                "digits/calibration.csv",
                "--weights",
                "int4",
            ],
        ),
        // An int16 input tensor (format version 7), f32 features only: the int16-input
        // estimate's whole-model check.
        (
            "digits_int16_input",
            &[
                "--calibration",
                "digits/calibration.csv",
                "--input-tensor",
                "int16",
                "--headroom",
                "2",
            ],
        ),
        ("digits_float", &["--float"]),
        ("vibration_float", &["--float"]),
    ];
    for (name, opts) in packs {
        let model = name.split('_').next().unwrap_or(name);
        let mut cmd = std::process::Command::new(&kinglet);
        cmd.current_dir(&ex)
            .arg("pack")
            .arg(format!("{model}/model.onnx"))
            .args(opts)
            .arg("-o")
            .arg(blobs.join(format!("{name}.kgl")))
            .stdout(Stdio::null());
        steps::run(&format!("kinglet pack {name}"), &mut cmd)?;
    }
    for name in ["digits", "vibration"] {
        // The output-major twin, the baseline of the int8 whole-model cases.
        blobs::twin_file(
            &blobs.join(format!("{name}.kgl")).display().to_string(),
            &blobs.join(format!("{name}.om.kgl")).display().to_string(),
        )?;
    }
    let mut shapes = rates::Shapes::new();
    let files = [
        ("digits", "digits"),
        ("vibration", "vibration"),
        ("digits-f32", "digits_float"),
        ("digits-i4", "digits_int4"),
        ("digits-i16in", "digits_int16_input"),
        ("vibration-f32", "vibration_float"),
        ("i8-784x100", "i8_784x100.whole"),
        ("i8-64x32", "i8_64x32"),
        ("f32-784x100", "f32_784x100"),
        ("f32-64x32", "f32_64x32"),
        ("i8-18x40", "i8_18x40"),
        ("f32-18x40", "f32_18x40"),
    ];
    for (case, file) in files {
        let path = blobs.join(format!("{file}.kgl"));
        let bytes = std::fs::read(&path).map_err(|e| format!("{}: {e}", path.display()))?;
        let m = kinglet_runtime::Model::parse(&bytes).map_err(|e| format!("{file}: {e}"))?;
        let layers = m
            .layers()
            .enumerate()
            .map(|(k, l)| rates::cycles::Layer {
                inputs: l.desc.inputs as usize,
                outputs: l.desc.outputs as usize,
                int4: l.desc.layout
                    == kinglet_runtime::unstable::wire::format::WeightLayout::Nibble4x4,
                int16_input: k == 0
                    && m.desc().input_width()
                        == kinglet_runtime::unstable::wire::format::InputWidth::I16,
            })
            .collect();
        shapes.insert(
            case.to_string(),
            rates::Shape {
                features: m.input_len(),
                layers,
            },
        );
    }
    Ok(shapes)
}

fn read(path: &Path) -> Result<String, String> {
    std::fs::read_to_string(path).map_err(|e| format!("{}: {e}", path.display()))
}

/// Builds the probes for `m`, runs them, and measures.
fn measure(p: &Paths, m: &Machine, blobs: &Path, plugin: &Path) -> Result<Target, String> {
    let kb = p.root.join("kernel-bench");
    step(&format!(
        "{}: building the probes ({}, opt-level s)",
        m.name, m.triple
    ));
    steps::cargo(
        &kb,
        &p.out,
        &["-p", "kinglet-firmware-bench", "--target", m.triple],
        &[("KB_BLOBS", blobs)],
    )?;
    // The code-size probes, built on their own so that their runtime's features are not
    // unified with the benchmark's: int8-only, and with the `f32` feature (the default runtime).
    for build in ["int8", "f32"] {
        let mut args = vec!["-p", "kinglet-size-probe", "--target", m.triple];
        if build == "f32" {
            args.extend(["--features", "f32"]);
        }
        steps::cargo(&kb, &p.out.join(format!("size-{build}")), &args, &[])?;
    }
    let fw = p.root.join("firmware-example");
    steps::cargo(
        &fw,
        &p.fw_target,
        &[
            "--target",
            m.triple,
            "--bin",
            "size_base",
            "--bin",
            "size_runtime",
        ],
        &[],
    )?;
    let elf = |dir: &Path, name: &str| Elf::read(&dir.join(m.triple).join("release").join(name));
    let (s8, sf) = (p.out.join("size-int8"), p.out.join("size-f32"));
    let base_elf = elf(&s8, "size_base")?;
    let (base, base_rodata) = (base_elf.text()?, base_elf.section(".rodata")?);
    let int8_only = elf(&s8, "size_infer")?;
    let classify = elf(&s8, "size_classify")?;
    // The detector's own check: on the Cortex-M0 the int8-only `infer` probe does use software
    // float (dequantisation, softmax), so finding nothing there means the detector is broken.
    if m.name == "m0"
        && !int8_only
            .soft_routines()?
            .iter()
            .any(|n| n.starts_with("__aeabi_f"))
    {
        return Err("no software float routine found in the M0 int8-only infer probe, where softmax needs one: the detector is broken".into());
    }
    let (fw_base, fw_rt) = (
        elf(&p.fw_target, "size_base")?,
        elf(&p.fw_target, "size_runtime")?,
    );
    let blob = std::fs::metadata(fw.join("models/digits.kgl"))
        .map_err(|e| format!("firmware-example/models/digits.kgl: {e}"))?
        .len();

    step(&format!(
        "{}: the benchmark under QEMU ({})",
        m.name, m.machine
    ));
    let bin = p.out.join(m.triple).join("release");
    let (log_text, counts) = counted(m, &bin, "bench", plugin, &p.out)?;
    for l in log_text.lines().filter(|l| l.starts_with("selfcheck:")) {
        println!("{} {l}", m.name);
    }
    let mut bench = bench::parse(&format!("{} bench", m.name), &log_text, &counts)?;
    {
        // The int4 layer, a firmware of its own (see `fw/src/bin/bench_i4.rs`).
        let (log_text, counts) = counted(m, &bin, "bench_i4", plugin, &p.out)?;
        let i4_run = bench::parse(&format!("{} bench_i4", m.name), &log_text, &counts)?;
        bench
            .cases
            .extend(i4_run.cases.into_iter().filter(|c| c.name != "empty"));
    }
    {
        // The int16-input first layer and its self-check, a firmware of its own (see
        // `fw/src/bin/bench_i16.rs`): its self-check counts in the target's totals.
        let (log_text, counts) = counted(m, &bin, "bench_i16", plugin, &p.out)?;
        for l in log_text.lines().filter(|l| l.starts_with("selfcheck:")) {
            println!("{} {l}", m.name);
        }
        let run = bench::parse(&format!("{} bench_i16", m.name), &log_text, &counts)?;
        bench.passed += run.passed;
        bench.failed += run.failed;
        bench
            .cases
            .extend(run.cases.into_iter().filter(|c| c.name != "empty"));
    }
    if m.triple.starts_with("thumbv7em") {
        // The f32 whole-model cases, a firmware of their own (see `fw/src/bin/bench_f32.rs`).
        let (log_text, counts) = counted(m, &bin, "bench_f32", plugin, &p.out)?;
        let f32_run = bench::parse(&format!("{} bench_f32", m.name), &log_text, &counts)?;
        bench
            .cases
            .extend(f32_run.cases.into_iter().filter(|c| c.name != "empty"));
    }

    step(&format!(
        "{}: the stack probe under a QEMU register trace",
        m.name
    ));
    let stack = trace_stack(m, &bin.join("stack"))?;
    let footprint_rodata = (fw_rt.section(".rodata")?)
        .checked_sub(fw_base.section(".rodata")? + blob)
        .ok_or("size_runtime has less .rodata than size_base and the blob")?;
    Ok(Target {
        name: m.name,
        triple: m.triple,
        bench,
        size: elf(&sf, "size_infer")?.text()?.saturating_sub(base),
        size_int8_only: int8_only.text()?.saturating_sub(base),
        size_classify: classify.text()?.saturating_sub(base),
        classify_soft: classify.soft_routines()?,
        rodata_int8_only: int8_only.section(".rodata")?.saturating_sub(base_rodata),
        rodata_classify: classify.section(".rodata")?.saturating_sub(base_rodata),
        stack,
        footprint_text: fw_rt.text()?.saturating_sub(fw_base.text()?),
        footprint_rodata,
    })
}

/// Runs firmware `name` under QEMU with the counting plugin; returns its output and the
/// plugin's counts (both also kept in the target directory as `M.NAME.log`, `M.NAME.counts`).
fn counted(
    m: &Machine,
    bin: &Path,
    name: &str,
    plugin: &Path,
    out: &Path,
) -> Result<(String, String), String> {
    let (log, counts) = (
        out.join(format!("{}.{name}.log", m.name)),
        out.join(format!("{}.{name}.counts", m.name)),
    );
    let _ = std::fs::remove_file(&counts);
    let plugin_arg = format!("{},out={}", plugin.display(), counts.display());
    let stdout = steps::run(
        &format!("the {} {name} firmware", m.name),
        &mut steps::qemu(m, &bin.join(name), &["-plugin", &plugin_arg]),
    )?;
    std::fs::write(&log, &stdout).map_err(|e| format!("{}: {e}", log.display()))?;
    Ok((
        String::from_utf8_lossy(&stdout).into_owned(),
        read(&counts)?,
    ))
}

/// Runs the stack probe with QEMU's register log on its standard error, one dump per
/// instruction, and pairs the probe's lines with the marked sections of the log.
fn trace_stack(m: &Machine, elf_path: &Path) -> Result<stack::Probe, String> {
    let elf = Elf::read(elf_path)?;
    let starts = elf.marker_addresses(elf::MARK_START)?;
    let stops = elf.marker_addresses(elf::MARK_STOP)?;
    let mut child = steps::qemu(
        m,
        elf_path,
        &["-singlestep", "-d", "cpu,nochain", "-D", "/dev/stderr"],
    )
    .stdin(Stdio::null())
    .stdout(Stdio::piped())
    .stderr(Stdio::piped())
    .spawn()
    .map_err(|e| format!("qemu-system-arm: {e}"))?;
    let trace = child.stderr.take().ok_or("no trace pipe")?;
    let windows = stack::windows(BufReader::with_capacity(1 << 20, trace), &starts, &stops);
    let out = child
        .wait_with_output()
        .map_err(|e| format!("qemu-system-arm: {e}"))?;
    let log = String::from_utf8_lossy(&out.stdout).into_owned();
    if !out.status.success() {
        return Err(format!(
            "the {} stack probe failed ({}):\n{log}",
            m.name, out.status
        ));
    }
    stack::pair(&format!("{} stack probe", m.name), &log, &windows?)
}
