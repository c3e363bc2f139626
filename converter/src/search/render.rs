//! The search's table as text.
use comfy_table::presets::UTF8_BORDERS_ONLY;
use comfy_table::{Cell, CellAlignment, Table};

use super::{Candidate, Method, Search};
use crate::echo;
use crate::vet::{Criteria, Gate};

/// The bound in words, e.g. `drop ≤ 1 pp (estimate)`.
pub fn bound_text(c: &Criteria) -> String {
    let mut parts = Vec::new();
    if let Some(d) = c.max_drop_pp {
        let on = match c.gate {
            Some(Gate::UpperLimit) => "upper limit of its 95% interval",
            _ => "estimate",
        };
        parts.push(format!("accuracy drop ≤ {} pp ({on})", echo::number(d)));
    }
    if let Some(a) = c.min_agreement_pct {
        parts.push(format!("agreement ≥ {} %", echo::number(a)));
    }
    parts.join(" and ")
}

fn pp(v: f64) -> String {
    // No negative zero.
    let s = format!("{v:.2}");
    if s == "-0.00" {
        "0.00".into()
    } else {
        s
    }
}

fn row(c: &Candidate, base: Option<usize>, picked: bool) -> Vec<Cell> {
    let right = |s: String| Cell::new(s).set_alignment(CellAlignment::Right);
    let share = base.map_or("-".into(), |b| {
        format!("{:.1} %", 100.0 * c.bytes as f64 / b.max(1) as f64)
    });
    let correct = match (c.int8_correct, c.rows) {
        (Some(k), n) => format!("{k} / {n}"),
        (None, _) => "-".into(),
    };
    let drop = match (c.drop_pp, c.drop_interval_pp) {
        (Some(d), Some((lo, hi))) => format!("{} [{}, {}]", pp(d), pp(lo), pp(hi)),
        _ => "-".into(),
    };
    vec![
        Cell::new(format!(
            "{}{}",
            c.label(),
            if picked { "  ← picked" } else { "" }
        )),
        Cell::new(c.role.text()),
        right(c.bytes.to_string()),
        right(share),
        right(correct),
        right(drop),
        right(format!(
            "{} / {} ({:.2} %)",
            c.agree, c.rows, c.agreement_pct
        )),
        Cell::new(if c.meets { "yes" } else { "no" }),
    ]
}

/// The table and the lines around it.
pub fn render(s: &Search, criteria: &Criteria, budget: Option<u64>) -> String {
    let mut t = Table::new();
    t.load_preset(UTF8_BORDERS_ONLY);
    t.set_header(vec![
        "weights",
        "tried as",
        "bytes",
        "vs int8",
        "correct",
        "drop pp [95% interval]",
        "agreement",
        "in bound",
    ]);
    let base = s.all_int8().map(|c| c.bytes);
    for (i, c) in s.candidates.iter().enumerate() {
        t.add_row(row(c, base, s.pick == Some(i)));
    }
    let method = match s.method {
        Method::Exhaustive => "every assignment of int8/int4 weights (exhaustive)",
        Method::Greedy => {
            "greedy: layers into int4 one at a time, least agreement lost per byte saved first"
        }
    };
    let mut out = format!(
        "weight precision search: {method}; bound: {}{}; ◀ marks the pick\n{t}\n",
        bound_text(criteria),
        budget.map_or(String::new(), |b| format!("; flash budget {b} bytes"))
    );
    match (s.picked(), s.closest.and_then(|i| s.candidates.get(i))) {
        (Some(p), _) => out.push_str(&format!(
            "picked: {} ({} bytes{})\n",
            p.label(),
            p.bytes,
            base.map_or(String::new(), |b| format!(
                ", {:.1} % of all int8, {} bytes saved",
                100.0 * p.bytes as f64 / b.max(1) as f64,
                b.saturating_sub(p.bytes)
            ))
        )),
        (None, Some(c)) if c.meets => out.push_str(&format!(
            "no candidate fits the flash budget; the smallest within the bound is {} ({} bytes)\n",
            c.label(),
            c.bytes
        )),
        (None, Some(c)) => out.push_str(&format!(
            "no candidate meets the bound; the closest is {} ({} bytes, {} over)\n",
            c.label(),
            c.bytes,
            pp(c.shortfall)
        )),
        (None, None) => {}
    }
    out
}
