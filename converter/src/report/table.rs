//! The report for people: aligned plain-text tables.
use comfy_table::{presets::UTF8_BORDERS_ONLY, Cell, CellAlignment, Table};

use super::inspect::BlobReport;

fn quant(q: Option<(f32, i8)>) -> String {
    q.map_or_else(|| "-".into(), |(s, z)| format!("{s:.3e} @ {z}"))
}

/// The cycle estimate line: instruction counts from measured rates, an estimate.
fn cycles(r: &BlobReport) -> String {
    let parts: Vec<String> = r
        .cycle_estimate
        .iter()
        .map(|c| format!("{}: ~{}", c.target, c.instructions))
        .collect();
    format!(
        "{} (estimate from instruction counts under QEMU; see BENCHMARKS.md)",
        parts.join(", ")
    )
}

/// Renders the report as text.
pub fn render(r: &BlobReport) -> String {
    let mut t = Table::new();
    t.load_preset(UTF8_BORDERS_ONLY);
    t.set_header([
        "layer",
        "shape",
        "activation",
        "parameters",
        "MACs",
        "bytes",
        "output quant",
    ]);
    for l in &r.layers {
        t.add_row(vec![
            Cell::new(l.layer).set_alignment(CellAlignment::Right),
            Cell::new(format!("{} → {}", l.inputs, l.outputs)),
            Cell::new(&l.activation),
            Cell::new(l.parameters).set_alignment(CellAlignment::Right),
            Cell::new(l.macs).set_alignment(CellAlignment::Right),
            Cell::new(l.bytes).set_alignment(CellAlignment::Right),
            Cell::new(quant(l.output_quant)),
        ]);
    }
    let labels = if r.labels.is_empty() {
        "(none)".to_string()
    } else {
        r.labels.join(", ")
    };
    let lines = [
        ("precision", r.precision.clone()),
        (
            "input",
            format!(
                "{} features, scaler: {}, quant: {}",
                r.inputs,
                r.scaler,
                quant(r.input_quant)
            ),
        ),
        ("output", format!("{} over {} classes", r.output, r.classes)),
        ("classes", labels),
        ("parameters", r.parameters.to_string()),
        ("MACs/inference", r.macs.to_string()),
        ("flash (blob)", format!("{} bytes", r.flash_bytes)),
        ("RAM (scratch)", format!("{} bytes", r.scratch_bytes)),
        ("cycles (est.)", cycles(r)),
    ];
    let mut out = t.to_string();
    out.push('\n');
    for (k, v) in lines {
        out.push_str(&format!("{k:>15}  {v}\n"));
    }
    out
}
