//! The comparison as one self-contained HTML page (inline CSS and SVG, no scripts, nothing
//! fetched): summary, verdict, the two confusion matrices as heat maps, per-layer SQNR bars
//! and a histogram of per-row score differences.
use super::faults::FaultReport;
use super::points::pp;
use super::render_text::CAVEAT;
use anyhow::Result;
use std::fmt::Write;

use super::charts::{confusion_svg, score_diff_svg, sqnr_svg};
use super::summary::VetReport;

/// Disagreeing rows listed in the page.
const MAX_ROWS_LISTED: usize = 50;

/// Escapes text for HTML.
fn esc(s: &str) -> String {
    let mut o = String::with_capacity(s.len());
    for ch in s.chars() {
        match ch {
            '&' => o.push_str("&amp;"),
            '<' => o.push_str("&lt;"),
            '>' => o.push_str("&gt;"),
            '"' => o.push_str("&quot;"),
            '\'' => o.push_str("&#39;"),
            c => o.push(c),
        }
    }
    o
}

const STYLE: &str = "body{font-family:sans-serif;margin:24px;color:#222;max-width:1150px}\
h1{font-size:22px;margin-bottom:4px}h2{font-size:17px;margin-top:28px;border-bottom:1px solid #ddd}\
table{border-collapse:collapse;margin:8px 0}td,th{padding:3px 10px;border-bottom:1px solid #eee;text-align:right}\
th{background:#f4f4f4}td.l,th.l{text-align:left}.pass{color:#1a7f37;font-weight:bold}\
.fail{color:#c62828;font-weight:bold}.meta{color:#555}.maps{display:flex;flex-wrap:wrap;gap:16px}\
.note{color:#555;font-size:14px}svg{max-width:100%;height:auto}";

fn pct(x: f64) -> String {
    format!("{:.2} %", 100.0 * x)
}

/// The fault section, first after the title: new misses and false alarms per fault class and
/// the rows themselves.
fn faults(h: &mut String, r: &VetReport, f: &FaultReport) {
    let _ = writeln!(
        h,
        "<h2>Faults</h2><p>Benign: {}. New missed faults (int8 says benign where the float model caught the fault; reference: {}): <b class=\"{}\">{}</b>. New false alarms: <b>{}</b>.</p>",
        esc(&f.benign_names.join(", ")),
        esc(&f.reference),
        if f.new_misses.is_empty() { "pass" } else { "fail" },
        f.new_misses.len(),
        f.new_false_alarms.len()
    );
    let _ = writeln!(
        h,
        "<table><tr><th class=\"l\">fault</th><th>raised by float</th><th>new misses</th><th>new false alarms</th></tr>"
    );
    for c in &f.per_class {
        let _ = writeln!(
            h,
            "<tr><td class=\"l\">{}</td><td>{}</td><td>{}</td><td>{}</td></tr>",
            esc(&c.name),
            c.raised_by_float,
            c.new_misses,
            c.new_false_alarms
        );
    }
    let _ = writeln!(h, "</table>");
    for (what, rows) in [
        ("Missed", &f.new_misses),
        ("False alarm", &f.new_false_alarms),
    ] {
        if rows.is_empty() {
            continue;
        }
        let list: Vec<String> = rows
            .iter()
            .map(|m| {
                format!(
                    "row {}: float {}, int8 {}",
                    m.data_row,
                    esc(&r.class_name(m.float_class)),
                    esc(&r.class_name(m.int8_class))
                )
            })
            .collect();
        let _ = writeln!(h, "<p>{what}: {}</p>", list.join("; "));
    }
}

/// Renders the page.
pub fn render(r: &VetReport) -> Result<String> {
    let mut h = String::new();
    let _ = write!(
        h,
        "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\"><title>kinglet vet: {}</title><style>{STYLE}</style></head><body>\n",
        esc(&r.int8_model)
    );
    let _ = writeln!(h, "<h1>int8 against float: {}</h1>", esc(&r.int8_model));
    let _ = writeln!(
        h,
        "<p class=\"meta\">int8 measured through {} · float model {} (runtime f32 path: {} on the same values) · data {}: {} rows, {} classes, {} output</p>",
        esc(&r.measured.int8_call),
        esc(&r.float_model),
        esc(&r.measured.float_call),
        esc(&r.data),
        r.rows,
        r.classes,
        esc(&r.output)
    );
    if let Some(f) = &r.faults {
        faults(&mut h, r, f);
    }
    if let Some(v) = &r.verdict {
        for c in &v.checks {
            let (class, word) = if c.passed {
                ("pass", "PASS")
            } else {
                ("fail", "FAIL")
            };
            let _ = writeln!(
                h,
                "<p><span class=\"{class}\">{word}</span> {}</p>",
                esc(&c.text)
            );
        }
        let _ = writeln!(h, "<p class=\"meta\">{}</p>", esc(CAVEAT));
    }

    let _ = writeln!(h, "<h2>Summary</h2><table>");
    if let Some(a) = &r.accuracy {
        let _ = writeln!(
            h,
            "<tr><th class=\"l\"></th><th>float</th><th>int8</th></tr>"
        );
        let _ = writeln!(
            h,
            "<tr><td class=\"l\">correct</td><td>{} / {}</td><td>{} / {}</td></tr>",
            a.float.correct, a.float.rows, a.int8.correct, a.int8.rows
        );
        let _ = writeln!(
            h,
            "<tr><td class=\"l\">accuracy</td><td>{}</td><td>{}</td></tr></table>",
            pct(a.float.accuracy),
            pct(a.int8.accuracy)
        );
        let _ = writeln!(
            h,
            "<p>Drop (float − int8): <b>{} pp</b>, 95% interval {} to {} pp ({}).<br>Rows only float gets right: {}, only int8: {}; {}: p = {:.4}.</p>",
            pp(a.drop_pp),
            pp(a.drop_interval_pp.lower),
            pp(a.drop_interval_pp.upper),
            esc(&a.drop_interval_pp.method),
            a.paired.first_only,
            a.paired.second_only,
            esc(&a.mcnemar.method),
            a.mcnemar.p_value
        );
    } else {
        let _ = writeln!(h, "</table>");
    }
    let g = &r.agreement;
    let _ = writeln!(
        h,
        "<p>Top-1 agreement: <b>{} of {}</b> rows ({}); {} differ.<br>The int8 blob's Model::infer and Model::classify give different classes on {} rows.<br>Score error ({}): max {:.3e}, mean {:.3e}.</p>",
        g.agree,
        g.rows,
        pct(g.rate),
        g.disagreements.len(),
        r.entry_split.rows,
        esc(&r.score_error.unit),
        r.score_error.max_abs,
        r.score_error.mean_abs
    );

    if let Some(c) = &r.confusion {
        let names: Vec<String> = (0..r.classes).map(|k| r.class_name(k)).collect();
        let _ = writeln!(h, "<h2>Confusion matrices (rows: true class, columns: predicted)</h2><div class=\"maps\">");
        h.push_str(&confusion_svg(&c.float, &names, "float")?);
        h.push_str(&confusion_svg(&c.int8, &names, "int8")?);
        let _ = writeln!(h, "</div>");
    }

    let _ = writeln!(h, "<h2>Per-layer fidelity</h2>");
    let _ = writeln!(
        h,
        "<p class=\"note\">SQNR = 10·log10(Σ x<sub>f</sub>² / Σ (x<sub>f</sub> − x<sub>q</sub>)²) over every element of every row; x<sub>q</sub> is the quantised tensor (int8; int16 for an int16 input) dequantised.</p>"
    );
    h.push_str(&sqnr_svg(&r.fidelity)?);
    let _ = writeln!(
        h,
        "<table><tr><th>tensor</th><th>SQNR (dB)</th><th>clipped values</th><th>noise from clipping</th><th>rounding alone (dB)</th></tr>"
    );
    for f in &r.fidelity {
        let db = |v: Option<f64>| v.map_or_else(|| "-".into(), |d| format!("{d:.1}"));
        let _ = writeln!(
            h,
            "<tr><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td></tr>",
            esc(&f.name),
            db(f.sqnr_db),
            f.clipped,
            f.clip_share
                .map_or_else(|| "-".into(), |c| format!("{:.1} %", 100.0 * c)),
            db(f.rounding_sqnr_db)
        );
    }
    let _ = writeln!(
        h,
        "</table><p class=\"note\">Clipped: float values beyond the quantised tensor's range (they saturate); their squared errors are the noise from clipping, the others' the rounding noise (with any error that reached the layer through its input).</p>"
    );

    let _ = writeln!(h, "<h2>Score differences</h2>");
    h.push_str(&score_diff_svg(
        &r.predictions.max_score_diff,
        &r.score_error.unit,
    )?);

    if let Some(per) = &r.per_class {
        let _ = writeln!(
            h,
            "<h2>Per class</h2><table><tr><th class=\"l\">class</th><th>rows</th><th>float precision</th><th>float recall</th><th>int8 precision</th><th>int8 recall</th></tr>"
        );
        for c in per {
            let _ = writeln!(
                h,
                "<tr><td class=\"l\">{}</td><td>{}</td><td>{:.4}</td><td>{:.4}</td><td>{:.4}</td><td>{:.4}</td></tr>",
                esc(&c.name),
                c.support,
                c.float.precision,
                c.float.recall,
                c.int8.precision,
                c.int8.recall
            );
        }
        let _ = writeln!(h, "</table>");
    }

    if !g.disagreements.is_empty() {
        let shown = g.disagreements.len().min(MAX_ROWS_LISTED);
        let _ = writeln!(
            h,
            "<h2>Disagreeing rows</h2><p class=\"note\">Largest score difference first; {shown} of {}; data rows count from 1, header not counted.</p><table><tr><th>data row</th><th class=\"l\">label</th><th class=\"l\">float</th><th class=\"l\">int8</th><th>max |Δscore|</th></tr>",
            g.disagreements.len()
        );
        for d in g.disagreements.iter().take(shown) {
            let _ = writeln!(
                h,
                "<tr><td>{}</td><td class=\"l\">{}</td><td class=\"l\">{}</td><td class=\"l\">{}</td><td>{:.4}</td></tr>",
                d.data_row,
                esc(&d.label.map_or("-".into(), |l| r.class_name(l))),
                esc(&r.class_name(d.float_class)),
                esc(&r.class_name(d.int8_class)),
                d.max_score_diff
            );
        }
        let _ = writeln!(h, "</table>");
    }
    if !r.notes.is_empty() {
        let _ = writeln!(h, "<h2>Notes</h2><ul>");
        for n in &r.notes {
            let _ = writeln!(h, "<li>{}</li>", esc(n));
        }
        let _ = writeln!(h, "</ul>");
    }
    let _ = writeln!(h, "</body></html>");
    Ok(h)
}

#[cfg(test)]
mod tests {
    use super::esc;

    #[test]
    fn escapes_markup() {
        assert_eq!(
            esc("<a href=\"x\">&'"),
            "&lt;a href=&quot;x&quot;&gt;&amp;&#39;"
        );
    }
}
