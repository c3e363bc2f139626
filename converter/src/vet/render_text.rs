//! The comparison for people: aligned plain-text tables, colour only when asked (on a terminal).
use super::points::pp;
use comfy_table::{presets::UTF8_BORDERS_ONLY, Cell, CellAlignment, Table};
use std::fmt::Write;

use super::faults::FaultReport;
use super::metrics::Confusion;
use super::summary::VetReport;

/// Widest confusion matrix printed as a table; larger ones are left to `--json` and `--html`.
const MAX_MATRIX_CLASSES: usize = 20;

/// How to render.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct TextOptions {
    /// Colour the verdict with ANSI escapes.
    pub colour: bool,
    /// Disagreeing rows to list.
    pub show_rows: usize,
}

/// A table whose columns after the first are right-aligned, header included.
fn table(header: Vec<String>) -> Table {
    let mut t = Table::new();
    t.load_preset(UTF8_BORDERS_ONLY);
    let n = header.len();
    t.set_header(header);
    for i in 1..n {
        if let Some(c) = t.column_mut(i) {
            c.set_cell_alignment(CellAlignment::Right);
        }
    }
    t
}

fn right(s: impl ToString) -> Cell {
    Cell::new(s.to_string()).set_alignment(CellAlignment::Right)
}

fn pct(x: f64) -> String {
    format!("{:.2} %", 100.0 * x)
}

fn paint(s: &str, code: &str, colour: bool) -> String {
    if colour {
        format!("\x1b[{code}m{s}\x1b[0m")
    } else {
        s.to_string()
    }
}

fn confusion(r: &VetReport, c: &Confusion) -> String {
    let mut header = vec!["true \\ predicted".to_string()];
    header.extend((0..r.classes).map(|k| r.class_name(k)));
    let mut t = table(header);
    for (k, row) in c.counts.iter().enumerate() {
        let mut cells = vec![Cell::new(r.class_name(k))];
        cells.extend(row.iter().map(|&n| {
            right(if n == 0 {
                ".".to_string()
            } else {
                n.to_string()
            })
        }));
        t.add_row(cells);
    }
    t.to_string()
}

/// Renders the whole report.
pub fn render(r: &VetReport, o: &TextOptions) -> String {
    let mut s = String::new();
    let m = &r.measured;
    let _ = writeln!(
        s,
        "int8 blob    {}, measured through {}",
        r.int8_model, m.int8_call
    );
    let _ = writeln!(
        s,
        "float model  {} (runtime f32 path: {} on the same values)",
        r.float_model, m.float_call
    );
    let _ = writeln!(
        s,
        "data         {}: {} rows, {} classes, {} output",
        r.data, r.rows, r.classes, r.output
    );
    if let Some(f) = &r.faults {
        s.push_str(&faults(r, f, o));
    }

    if let Some(a) = &r.accuracy {
        let _ = writeln!(s, "\nAccuracy");
        let mut t = table(vec![String::new(), "float".into(), "int8".into()]);
        t.add_row(vec![
            Cell::new("correct"),
            right(format!("{} / {}", a.float.correct, a.float.rows)),
            right(format!("{} / {}", a.int8.correct, a.int8.rows)),
        ]);
        t.add_row(vec![
            Cell::new("accuracy"),
            right(pct(a.float.accuracy)),
            right(pct(a.int8.accuracy)),
        ]);
        let _ = writeln!(s, "{t}");
        let _ = writeln!(
            s,
            "  drop (float − int8): {} pp, 95% interval {} to {} pp\n    ({})",
            pp(a.drop_pp),
            pp(a.drop_interval_pp.lower),
            pp(a.drop_interval_pp.upper),
            a.drop_interval_pp.method
        );
        let _ = writeln!(
            s,
            "  rows only float gets right: {}, only int8 gets right: {}; {}: p = {:.4}",
            a.paired.first_only, a.paired.second_only, a.mcnemar.method, a.mcnemar.p_value
        );
    }

    let g = &r.agreement;
    let _ = writeln!(
        s,
        "\nAgreement    {} of {} rows ({}) get the same class from both models; {} differ",
        g.agree,
        g.rows,
        pct(g.rate),
        g.disagreements.len()
    );
    let split = &r.entry_split;
    let _ = write!(
        s,
        "infer/classify  {} rows where the int8 blob's Model::infer and Model::classify give different classes",
        split.rows
    );
    if split.rows > 0 {
        let shown: Vec<String> = split
            .data_rows
            .iter()
            .take(o.show_rows)
            .map(usize::to_string)
            .collect();
        let more = if split.data_rows.len() > shown.len() {
            ", …"
        } else {
            ""
        };
        let _ = write!(
            s,
            " (a tie after infer's float {}): data rows {}{more}",
            if r.output == "sigmoid" {
                "sigmoid"
            } else {
                "softmax"
            },
            shown.join(", ")
        );
    }
    let _ = writeln!(s);
    let e = &r.score_error;
    let _ = writeln!(
        s,
        "Score error  max |float − int8| {:.3e}, mean {:.3e} ({})",
        e.max_abs, e.mean_abs, e.unit
    );

    let _ = writeln!(
        s,
        "\nPer-layer fidelity: SQNR = 10·log10(Σ x_f² / Σ (x_f − x_q)²) over all rows; clipped: float values beyond the quantised range (int8; int16 for an int16 input tensor), and their share of the noise; rounding alone: the SQNR without that share"
    );
    let mut t = table(
        [
            "tensor",
            "width",
            "SQNR (dB)",
            "clipped",
            "noise from clipping",
            "rounding alone (dB)",
        ]
        .map(String::from)
        .to_vec(),
    );
    for f in &r.fidelity {
        let v = match (f.sqnr_db, &f.note) {
            (Some(db), _) => format!("{db:.1}"),
            (None, Some(n)) => n.clone(),
            (None, None) => "-".into(),
        };
        t.add_row(vec![
            Cell::new(&f.name),
            right(f.width),
            right(v),
            right(f.clipped),
            right(
                f.clip_share
                    .map_or_else(|| "-".into(), |c| format!("{:.1} %", 100.0 * c)),
            ),
            right(
                f.rounding_sqnr_db
                    .map_or_else(|| "-".into(), |db| format!("{db:.1}")),
            ),
        ]);
    }
    let _ = writeln!(s, "{t}");

    if let Some(per) = &r.per_class {
        let _ = writeln!(s, "\nPer class");
        let mut t = table(
            [
                "class",
                "rows",
                "float precision",
                "float recall",
                "int8 precision",
                "int8 recall",
            ]
            .map(String::from)
            .to_vec(),
        );
        for c in per {
            let p = |x: f64, undefined: bool| {
                if undefined {
                    format!("{x:.4}*")
                } else {
                    format!("{x:.4}")
                }
            };
            t.add_row(vec![
                Cell::new(&c.name),
                right(c.support),
                right(p(c.float.precision, c.float.precision_undefined())),
                right(p(c.float.recall, c.float.recall_undefined())),
                right(p(c.int8.precision, c.int8.precision_undefined())),
                right(p(c.int8.recall, c.int8.recall_undefined())),
            ]);
        }
        let _ = writeln!(s, "{t}");
        if per.iter().any(|c| {
            c.float.precision_undefined()
                || c.int8.precision_undefined()
                || c.float.recall_undefined()
        }) {
            let _ = writeln!(
                s,
                "  * undefined (no predictions or no rows), reported as 0"
            );
        }
    }

    if let Some(c) = &r.confusion {
        if r.classes <= MAX_MATRIX_CLASSES {
            let _ = writeln!(
                s,
                "\nConfusion matrix, float (rows: true class, columns: predicted)"
            );
            let _ = writeln!(s, "{}", confusion(r, &c.float));
            let _ = writeln!(s, "\nConfusion matrix, int8");
            let _ = writeln!(s, "{}", confusion(r, &c.int8));
        } else {
            let _ = writeln!(
                s,
                "\nConfusion matrices: {} classes are too many for a table here; see --json or --html",
                r.classes
            );
        }
    }

    if !g.disagreements.is_empty() && o.show_rows > 0 {
        let shown = g.disagreements.len().min(o.show_rows);
        let _ = writeln!(
            s,
            "\nDisagreeing rows, largest score difference first ({shown} of {}; data rows count from 1, header not counted)",
            g.disagreements.len()
        );
        let mut t = table(
            ["data row", "label", "float", "int8", "max |Δscore|"]
                .map(String::from)
                .to_vec(),
        );
        for d in g.disagreements.iter().take(shown) {
            t.add_row(vec![
                right(d.data_row),
                Cell::new(d.label.map_or("-".into(), |l| r.class_name(l))),
                Cell::new(r.class_name(d.float_class)),
                Cell::new(r.class_name(d.int8_class)),
                right(format!("{:.4}", d.max_score_diff)),
            ]);
        }
        let _ = writeln!(s, "{t}");
    }

    for n in &r.notes {
        let _ = writeln!(s, "note: {n}");
    }
    if let Some(v) = &r.verdict {
        let _ = writeln!(s);
        for c in &v.checks {
            let word = if c.passed {
                paint("PASS", "1;32", o.colour)
            } else {
                paint("FAIL", "1;31", o.colour)
            };
            let _ = writeln!(s, "{word}  {}", c.text);
        }
        let overall = if v.passed {
            paint("verdict: PASS", "1;32", o.colour)
        } else {
            paint("verdict: FAIL", "1;31", o.colour)
        };
        let _ = writeln!(s, "{overall}");
        let _ = writeln!(s, "{CAVEAT}");
    }
    s
}

/// Printed under every verdict, in text and HTML.
pub const CAVEAT: &str = "A pass means the two models agree on these rows only; it does not replace validation on the device with field data.";

/// The fault section: first, since a missed fault outweighs every other disagreement.
fn faults(r: &VetReport, f: &FaultReport, o: &TextOptions) -> String {
    let mut s = String::new();
    let against = if f.reference == "labels" {
        "the float model caught the labelled fault"
    } else {
        "the float model raised a fault (no labels: the float model is the reference)"
    };
    let _ = writeln!(
        s,
        "\nFaults (benign: {})\n  new missed faults: {} (int8 says benign where {against})\n  new false alarms:  {} (int8 raises a fault where the float model said benign)",
        f.benign_names.join(", "),
        paint(&f.new_misses.len().to_string(), "1;31", o.colour && !f.new_misses.is_empty()),
        f.new_false_alarms.len()
    );
    let mut t = table(vec![
        "fault".into(),
        "raised by float".into(),
        "new misses".into(),
        "new false alarms".into(),
    ]);
    for c in &f.per_class {
        t.add_row(vec![
            Cell::new(&c.name),
            right(c.raised_by_float.to_string()),
            right(c.new_misses.to_string()),
            right(c.new_false_alarms.to_string()),
        ]);
    }
    let _ = writeln!(s, "{t}");
    for (what, rows) in [
        ("missed", &f.new_misses),
        ("false alarm", &f.new_false_alarms),
    ] {
        for m in rows.iter().take(o.show_rows) {
            let truth = m
                .label
                .map(|t| format!("true {}, ", r.class_name(t)))
                .unwrap_or_default();
            let _ = writeln!(
                s,
                "  {what}: data row {}: {truth}float {}, int8 {}",
                m.data_row,
                r.class_name(m.float_class),
                r.class_name(m.int8_class)
            );
        }
        if rows.len() > o.show_rows {
            let _ = writeln!(
                s,
                "  … {} more {what} rows (all in --json)",
                rows.len() - o.show_rows
            );
        }
    }
    s
}
