//! The report for people: aligned plain-text tables.
use comfy_table::{presets::UTF8_BORDERS_ONLY, Cell, CellAlignment, Table};

use super::inspect::BlobReport;

fn quant(q: Option<(f32, i8)>) -> String {
    q.map_or_else(|| "-".into(), |(s, z)| format!("{s:.3e} @ {z}"))
}

/// The estimate lines: one per target and input path, an instruction count from measured
/// rates, with the latency range when a clock was given, then what the figures are.
fn estimate_lines(r: &BlobReport) -> Vec<(&'static str, String)> {
    let mut lines = Vec::new();
    let mut assumptions: Vec<&str> = Vec::new();
    for (i, e) in r.instruction_estimate.iter().enumerate() {
        let mut v = format!("{}, {}: ~{}", e.target, e.feed.name(), e.instructions);
        if let Some(l) = &e.latency {
            v += &format!(
                " → {}–{} at {} MHz",
                micros(l.low_us),
                micros(l.high_us),
                l.clock_mhz
            );
            if !assumptions.contains(&l.assumption) {
                assumptions.push(l.assumption);
            }
        }
        let key = if i == 0 { "instructions (est.)" } else { "" };
        lines.push((key, v));
    }
    if lines.is_empty() {
        lines.push((
            "instructions (est.)",
            "(no measured rates for this model kind)".into(),
        ));
    }
    lines.push((
        "",
        "fitted to instruction counts under QEMU, not cycles; see BENCHMARKS.md".into(),
    ));
    if r.layers.iter().any(|l| l.weights == "int4") {
        // The rates are fitted to int8 layers; BENCHMARKS.md has the int4 kernel's own count.
        lines.push((
            "",
            "int4 layers counted at the int8 rates (the int4 kernels take a little more per MAC: BENCHMARKS.md, i4-784x100)".into(),
        ));
    }
    for a in assumptions {
        lines.push(("", format!("latency assumes {a}")));
    }
    lines
}

/// A time in microseconds, in µs or ms.
fn micros(us: f64) -> String {
    if us >= 1000.0 {
        format!("{:.2} ms", us / 1000.0)
    } else {
        format!("{us:.1} µs")
    }
}

/// Renders the report as text.
pub fn render(r: &BlobReport) -> String {
    let mut t = Table::new();
    t.load_preset(UTF8_BORDERS_ONLY);
    // A column for the weights' precision when a layer's differs from the model's (int4).
    let mixed = r.layers.iter().any(|l| l.weights != r.precision);
    let mut header = vec!["layer", "shape", "activation"];
    if mixed {
        header.push("weights");
    }
    header.extend(["parameters", "MACs", "bytes", "output quant"]);
    t.set_header(header);
    for l in &r.layers {
        let mut row = vec![
            Cell::new(l.layer).set_alignment(CellAlignment::Right),
            Cell::new(format!("{} → {}", l.inputs, l.outputs)),
            Cell::new(&l.activation),
        ];
        if mixed {
            row.push(Cell::new(&l.weights));
        }
        row.extend([
            Cell::new(l.parameters).set_alignment(CellAlignment::Right),
            Cell::new(l.macs).set_alignment(CellAlignment::Right),
            Cell::new(l.bytes).set_alignment(CellAlignment::Right),
            Cell::new(quant(l.output_quant)),
        ]);
        t.add_row(row);
    }
    let labels = if r.labels.is_empty() {
        "(none)".to_string()
    } else {
        r.labels.join(", ")
    };
    let lines = [
        ("precision", r.precision.clone()),
        ("format", format!("version {}", r.format_version)),
        (
            "input",
            format!(
                "{} features, scaler: {}, quant: {}{}{}",
                r.inputs,
                r.scaler,
                if r.input_tensor == "int16" {
                    "int16 "
                } else {
                    ""
                },
                quant(r.input_quant),
                match (r.input_quant, r.integer_input) {
                    (None, _) => "",
                    (Some(_), true) => ", integer input path: yes (f32 and i16/u8 samples)",
                    (Some(_), false) => ", integer input path: no (f32 features only)",
                }
            ),
        ),
        ("output", format!("{} over {} classes", r.output, r.classes)),
        ("classes", labels),
        ("parameters", r.parameters.to_string()),
        ("MACs/inference", r.macs.to_string()),
        ("flash (blob)", format!("{} bytes", r.flash_bytes)),
        ("RAM (scratch)", format!("{} bytes", r.scratch_bytes)),
    ];
    let mut out = t.to_string();
    out.push('\n');
    let mut all: Vec<(&str, String)> = lines.to_vec();
    if let Some(a) = &r.alignment {
        all.push((
            "weights aligned",
            format!(
                "{} at load address {:#x} (the Cortex-M4 kernels need 4-byte aligned weights)",
                if a.weights_aligned { "yes" } else { "NO" },
                a.load_address
            ),
        ));
    }
    all.extend(estimate_lines(r));
    for (k, v) in all {
        out.push_str(&format!("{k:>19}  {v}\n"));
    }
    out
}
