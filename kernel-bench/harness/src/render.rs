//! What the harness writes: the tables of BENCHMARKS.md, `converter/src/fit/measured.rs` and
//! the rates in `converter/src/report/cycles.rs`, all from one run.
//!
//! Instruction counts, and what is computed from them, are rendered with [`approx`]: the text
//! carries them between two control characters, so that [`crate::consumers`] can hold a
//! recorded count to [`MARGIN`] while every size, stack figure and word must match exactly.
//! [`plain`] drops the marks.
use crate::goals::{self, MARGIN};
use crate::rates::cycles::Rates;
use crate::rates::Checked;
use crate::Target;
use std::fmt::{Display, Write};

/// Opens an approximate number.
pub const OPEN: char = '\u{1}';
/// Closes an approximate number.
pub const CLOSE: char = '\u{2}';

/// A number a consumer may record within [`MARGIN`].
pub fn approx(v: impl Display) -> String {
    format!("{OPEN}{v}{CLOSE}")
}

/// The text without the marks.
pub fn plain(marked: &str) -> String {
    marked
        .chars()
        .filter(|&c| c != OPEN && c != CLOSE)
        .collect()
}

fn per_mac(v: Option<f64>) -> String {
    v.map_or("-".into(), |v| approx(format!("{v:.2}")))
}

/// Guards against `write!` into a `String`, which cannot fail.
macro_rules! w {
    ($s:expr, $($t:tt)*) => { let _ = writeln!($s, $($t)*); };
}

/// The results region of BENCHMARKS.md: dense layers, whole inferences, the integer input
/// path, code size, stack, goals, self-check.
pub fn results(targets: &[Target], estimates: &[Checked]) -> String {
    let mut s = String::new();
    w!(s, "Dense layers, instructions per MAC (lower is better):\n");
    w!(s, "| layer | target | naive | portable, output-major (before) | portable, blocked | kernel (after) | kernel |");
    w!(s, "|---|---|---:|---:|---:|---:|---|");
    for name in [
        "i8-784x100",
        "i4-784x100",
        "i16in-784x100",
        "i8-64x32",
        "i16in-64x64",
        "f32-784x100",
        "f32-64x32",
    ] {
        for t in targets {
            let r = &t.bench;
            if r.case(name, "naive").is_none() {
                continue;
            }
            // Soft-float targets run the one-block Rust f32 kernel of `dense/m0.rs`.
            // The int16-input kernels are plain Rust on every target (`dense/wide.rs`).
            let kernel = if name.starts_with("f32") && r.kernel != "dsp" {
                "m0 (Rust, one block)"
            } else if name.starts_with("i16in") {
                "wide (Rust, every target)"
            } else {
                &r.kernel
            };
            w!(
                s,
                "| {name} | {} | {} | {} | {} | {} | {kernel} |",
                t.name,
                per_mac(r.per_mac(name, "naive")),
                per_mac(r.per_mac(name, "portable")),
                per_mac(r.per_mac(name, "portable-blocked")),
                per_mac(r.per_mac(name, "kernel")),
            );
        }
    }
    w!(
        s,
        "\nint8 pointwise activation table, looked up as the kernel stores (64 → 32 layer with a table minus without), instructions added per element:\n"
    );
    w!(s, "| target | instr/element |");
    w!(s, "|---|---:|");
    for t in targets {
        w!(
            s,
            "| {} | {} |",
            t.name,
            per_mac(t.bench.added_per_element("act-table", "base", "kernel"))
        );
    }
    w!(
        s,
        "\nWhole int8 inference (scaling, every layer, softmax), instructions:\n"
    );
    w!(s, "| model | target | MACs | before (portable) | after (kernel) | instr/MAC after | Σ dense layers | whole / Σ layers |");
    w!(s, "|---|---|---:|---:|---:|---:|---:|---:|");
    for model in ["digits", "vibration", "i8-784x100", "i8-64x32", "i8-18x40"] {
        for t in targets {
            if let Some((portable, whole, layers, ratio)) = t.bench.model_ratio(model) {
                let macs = t.bench.case(model, "model-kernel").map_or(0, |c| c.macs);
                w!(
                    s,
                    "| {model} | {} | {macs} | {} | {} | {} | {} | {} |",
                    t.name,
                    approx(portable),
                    approx(whole),
                    approx(format!("{:.2}", whole as f64 / macs.max(1) as f64)),
                    approx(layers),
                    approx(format!("{ratio:.3}"))
                );
            }
        }
    }
    w!(
        s,
        "\nWhole f32 inference (the f32 twins of the two models, f32 features), instructions:\n"
    );
    w!(
        s,
        "| model | target | MACs | whole | instr/MAC | Σ dense layers | whole / Σ layers |"
    );
    w!(s, "|---|---|---:|---:|---:|---:|---:|");
    for model in [
        "digits-f32",
        "vibration-f32",
        "f32-784x100",
        "f32-64x32",
        "f32-18x40",
    ] {
        for t in targets {
            let (Some((whole, layers)), Some(c)) = (
                t.bench.whole_and_layers(model),
                t.bench.case(model, "model-kernel"),
            ) else {
                continue;
            };
            w!(
                s,
                "| {} | {} | {} | {} | {} | {} | {} |",
                model.trim_end_matches("-f32"),
                t.name,
                c.macs,
                approx(whole),
                approx(format!("{:.2}", whole as f64 / c.macs.max(1) as f64)),
                approx(layers),
                approx(format!("{:.3}", whole as f64 / layers.max(1) as f64))
            );
        }
    }
    w!(
        s,
        "\nInteger input path (the same features as `i16` counts), instructions:\n"
    );
    w!(s, "| model | target | `infer` | `classify` | Σ dense layers | `infer` / Σ layers | `classify` / Σ layers |");
    w!(s, "|---|---|---:|---:|---:|---:|---:|");
    for model in ["digits", "vibration", "i8-784x100", "i8-64x32", "i8-18x40"] {
        for t in targets {
            let r = &t.bench;
            let (Some(infer), Some(classify), Some((_, _, layers, _))) = (
                r.case(model, "model-infer-i16"),
                r.case(model, "model-classify-i16"),
                r.model_ratio(model),
            ) else {
                continue;
            };
            let ratio = |c: u64| approx(format!("{:.3}", c as f64 / layers.max(1) as f64));
            w!(
                s,
                "| {model} | {} | {} | {} | {} | {} | {} |",
                t.name,
                approx(infer.count),
                approx(classify.count),
                approx(layers),
                ratio(infer.count),
                ratio(classify.count)
            );
        }
    }
    unaligned(&mut s, targets);
    estimate_table(&mut s, estimates);
    w!(s, "\nCode size:\n");
    w!(s, "| target | runtime .text, int8-only build (bytes) | int8-only, `classify` (bytes) | default build, f32 and int4 (bytes) | self-check |");
    w!(s, "|---|---:|---:|---:|---|");
    for t in targets {
        w!(
            s,
            "| {} | {} | {} | {} | {} passed, {} failed |",
            t.name,
            t.size_int8_only,
            t.size_classify,
            t.size,
            t.bench.passed,
            t.bench.failed
        );
    }
    w!(s, "\nStack, bytes (the deeper of the paint and the lowest stack pointer; the last column is how much deeper the stack pointer went than the paint showed):\n");
    let calls = [
        "parse",
        "infer-f32",
        "infer-u8",
        "infer-i16",
        "classify-i16",
    ];
    w!(s, "| target | model | `parse` | `infer`, f32 features | `infer`, u8 | `infer`, i16 | `classify`, i16 | below the paint |");
    w!(s, "|---|---|---:|---:|---:|---:|---:|---:|");
    for t in targets {
        for model in ["digits", "vibration", "digits-f32"] {
            let cells: Vec<String> = calls
                .iter()
                .map(|c| {
                    t.stack
                        .get(model, c)
                        .map_or("-".into(), |c| c.bytes().to_string())
                })
                .collect();
            let below = t
                .stack
                .calls
                .iter()
                .filter(|c| c.model == model)
                .map(|c| c.lowest_sp.saturating_sub(c.painted))
                .max()
                .unwrap_or(0);
            let label = if model == "digits-f32" {
                "digits, f32 model"
            } else {
                model
            };
            w!(
                s,
                "| {} | {label} | {} | {below} |",
                t.name,
                cells.join(" | ")
            );
        }
    }
    w!(
        s,
        "\nGoals (--check fails above the goal, or above the recorded value where the goal is not met, plus {:.0}%):\n",
        MARGIN * 100.0
    );
    for g in goals::goals(targets) {
        let value = format!("{:.3}", g.value);
        let value = if g.counted { approx(value) } else { value };
        let note = if !g.stated {
            format!(
                "no goal: measured regression limit (--check fails above {:.3})",
                g.check_limit()
            )
        } else if g.met() {
            "met".to_string()
        } else {
            format!("MISSED (regression limit {:.3})", g.check_limit())
        };
        if g.stated {
            w!(s, "- {}: {value} (goal ≤ {}) {note}", g.what, g.limit);
        } else {
            w!(s, "- {}: {value} ({note})", g.what);
        }
    }
    let passed: u64 = targets.iter().map(|t| t.bench.passed).sum();
    let failed: u64 = targets.iter().map(|t| t.bench.failed).sum();
    let each: Vec<String> = targets
        .iter()
        .map(|t| format!("{} {}", t.name, t.bench.passed))
        .collect();
    w!(
        s,
        "\nKernel self-check on target: {passed} passed, {failed} failed ({}).",
        each.join(", ")
    );
    s
}

/// The target's name in the footprint table and in `measured.rs`.
fn core_name(t: &Target) -> &'static str {
    if t.bench.kernel == "dsp" {
        "Cortex-M4F"
    } else {
        "Cortex-M0"
    }
}

/// The footprint region of BENCHMARKS.md: what `measured.rs` records.
pub fn footprint(targets: &[Target]) -> String {
    let mut s = String::new();
    w!(s, "| target | runtime `.text` (bytes) | runtime `.rodata` (bytes) | peak stack, parse (bytes) | peak stack, one inference (bytes) | peak stack, `classify` (bytes) | `Model` value (bytes) |");
    w!(s, "|---|---:|---:|---:|---:|---:|---:|");
    for t in footprint_order(targets) {
        w!(
            s,
            "| {} (`{}`) | {} | {} | {} | {} | {} | {} |",
            core_name(t),
            t.triple,
            t.footprint_text,
            t.footprint_rodata,
            t.stack.parse(),
            t.stack.inference(None),
            t.stack.classify(),
            t.stack.model_struct
        );
    }
    s
}

/// M0 first, as `measured.rs` has always listed it.
fn footprint_order(targets: &[Target]) -> Vec<&Target> {
    let mut v: Vec<&Target> = targets.iter().collect();
    v.sort_by_key(|t| t.bench.kernel == "dsp");
    v
}

/// `converter/src/fit/measured.rs`.
pub fn measured(targets: &[Target], rustc: &str) -> String {
    let mut s = String::new();
    w!(s, "//! Runtime footprint on each core (generated by `bash scripts/kernel-bench.sh --write`, the");
    w!(s, "//! measurement harness `kernel-bench/harness`; do not edit: `--check` fails on any change).");
    w!(s, "//!");
    w!(s, "//! Measured with {rustc} and the release profile of the probes' workspaces (opt-level \"s\",");
    w!(
        s,
        "//! fat LTO, one codegen unit). Code, one entry per runtime build a firmware can link:"
    );
    w!(s, "//! `default_build` is `.text` and `.rodata` of the example firmware's `size_runtime` (parse +");
    w!(
        s,
        "//! one inference per input path, default features) minus those of its `size_base` (same"
    );
    w!(
        s,
        "//! start-up and console, no runtime), with the embedded blob taken out of `.rodata`;"
    );
    w!(s, "//! `int8_only` and `classify_only` are the size probes of `kernel-bench/size` built without");
    w!(s, "//! the `f32` feature (`size_infer`: parse + `infer`; `size_classify`: parse + `classify` from");
    w!(s, "//! `u8`) minus their `size_base`. Stack: the stack probe `kernel-bench/fw/src/bin/stack.rs`");
    w!(
        s,
        "//! under QEMU, per call the deeper of the painted stack and the lowest stack pointer a"
    );
    w!(s, "//! register trace saw; `stack_parse` is the deepest `Model::parse`, `stack_infer` the deepest");
    w!(s, "//! `infer` or `classify` (int8 digits and vibration, f32 digits; f32, u8 and i16 features),");
    w!(
        s,
        "//! `stack_classify` the deepest `classify`. BENCHMARKS.md lists every call."
    );
    w!(s, "use super::{{Code, Measured}};");
    for t in footprint_order(targets) {
        let (doc, name) = if t.bench.kernel == "dsp" {
            (
                "Cortex-M4F / M7 class (`thumbv7em-none-eabihf`, single-precision FPU).",
                "CORTEX_M4F",
            )
        } else {
            (
                "Cortex-M0 / M0+ (`thumbv6m-none-eabi`, no FPU: float is software).",
                "CORTEX_M0",
            )
        };
        w!(s, "\n/// {doc}");
        w!(s, "pub const {name}: Measured = Measured {{");
        w!(s, "    target: \"{}\",", t.triple);
        // In rustfmt's layout, so `cargo fmt --check` and `--check` agree on the file.
        for (field, text, rodata) in [
            ("default_build", t.footprint_text, t.footprint_rodata),
            ("int8_only", t.size_int8_only, t.rodata_int8_only),
            ("classify_only", t.size_classify, t.rodata_classify),
        ] {
            w!(s, "    {field}: Code {{");
            w!(s, "        text: {text},");
            w!(s, "        rodata: {rodata},");
            w!(s, "    }},");
        }
        w!(s, "    stack_parse: {},", t.stack.parse());
        w!(s, "    stack_infer: {},", t.stack.inference(None));
        w!(s, "    stack_classify: {},", t.stack.classify());
        w!(s, "    model_struct: {},", t.stack.model_struct);
        w!(s, "}};");
    }
    s
}

/// The rates region of `converter/src/report/cycles.rs`: `RATES`, one entry per target,
/// weight precision and input path.
pub fn rates(rates: &[Rates]) -> String {
    let mut s = String::new();
    let f = |v: f64| approx(format!("{v:?}"));
    w!(s, "/// Fitted by the measurement harness (kernel-bench, opt-level \"s\"): the layer rates to every");
    w!(
        s,
        "/// layer counted alone, the rest to the whole-model counts (digits, vibration and the"
    );
    w!(s, "/// synthetic one-layer models, each through the input path named) less the estimated layers.");
    w!(s, "pub const RATES: [Rates; {}] = [", rates.len());
    for r in rates {
        w!(s, "    Rates {{");
        w!(s, "        target: \"{}\",", r.target);
        w!(s, "        core: Core::{:?},", r.core);
        w!(s, "        weights: Weights::{:?},", r.weights);
        w!(s, "        feed: Feed::{:?},", r.feed);
        for (name, v) in [
            ("per_mac", r.per_mac),
            ("per_mac_int4", r.per_mac_int4),
            ("per_mac_int16_input", r.per_mac_int16_input),
            ("per_row", r.per_row),
            ("per_partial_row", r.per_partial_row),
            ("per_input", r.per_input),
            ("per_layer", r.per_layer),
            ("per_feature", r.per_feature),
            ("per_class", r.per_class),
            ("fixed", r.fixed),
        ] {
            w!(s, "        {name}: {},", f(v));
        }
        w!(s, "    }},");
    }
    w!(s, "];");
    s
}

/// The Cortex-M4 cases on blobs one byte past a 4-byte boundary, against the aligned ones.
fn unaligned(s: &mut String, targets: &[Target]) {
    let rows: Vec<String> = targets
        .iter()
        .flat_map(|t| {
            let r = &t.bench;
            let layers = ["i8-784x100", "i8-64x32", "f32-784x100", "f32-64x32"]
                .into_iter()
                .filter_map(move |name| {
                    let (a, u) = (
                        r.per_mac(name, "kernel")?,
                        r.per_mac(name, "kernel-unaligned")?,
                    );
                    Some(format!(
                        "| {name} (layer, instr/MAC) | {} | {} | {} | {} |",
                        t.name,
                        approx(format!("{a:.2}")),
                        approx(format!("{u:.2}")),
                        approx(format!("{:.3}", u / a))
                    ))
                });
            let models = ["digits", "vibration"].into_iter().filter_map(move |name| {
                let (a, u) = (
                    r.case(name, "model-kernel")?,
                    r.case(name, "model-unaligned")?,
                );
                Some(format!(
                    "| {name} (whole `infer`, instructions) | {} | {} | {} | {} |",
                    t.name,
                    approx(a.count),
                    approx(u.count),
                    approx(format!("{:.3}", u.count as f64 / a.count.max(1) as f64))
                ))
            });
            layers.chain(models)
        })
        .collect();
    if rows.is_empty() {
        return;
    }
    w!(s, "\nUnaligned blob (the same blob one byte past a 4-byte boundary; only the Cortex-M4 kernels care), instruction counts:\n");
    w!(
        s,
        "| case | target | aligned | unaligned | unaligned / aligned |"
    );
    w!(s, "|---|---|---:|---:|---:|");
    for r in rows {
        w!(s, "{r}");
    }
}

/// Every measured whole-model count against the estimate of `kinglet inspect`.
fn estimate_table(s: &mut String, estimates: &[Checked]) {
    w!(s, "\nThe estimate of `kinglet inspect` (`converter/src/report/cycles.rs`, rates fitted by this run) against every whole-model count, instructions (`--check` fails beyond ±{:.0}%):\n", 100.0 * crate::rates::cycles::TOLERANCE);
    w!(
        s,
        "| model | target | input path | measured | estimate | error |"
    );
    w!(s, "|---|---|---|---:|---:|---:|");
    for e in estimates {
        w!(
            s,
            "| {} | {} | {} | {} | {} | {}% |",
            e.model,
            e.target,
            e.feed.name(),
            approx(e.measured),
            approx(e.estimated),
            approx(format!("{:+.1}", 100.0 * e.error()))
        );
    }
}
