//! How an int8 pack was calibrated, per tensor: the range, the values it clipped, and the values
//! far from all the others ([`crate::quantise::spread`]); as data (JSON) and as a table.
use comfy_table::{presets::UTF8_BORDERS_ONLY, Cell, CellAlignment, Table};
use serde::Serialize;

use crate::pack::RawInputChoice;
use crate::quantise::advice::num;
use crate::quantise::calibrate::RangeMethod;
use crate::quantise::spread::{TensorStats, CORE_TRIM, DOMINATED_SPREAD};

/// The calibration part of the pack report.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct CalibrationReport {
    /// `min/max` or `percentile P`.
    pub method: String,
    /// Whether the biases were corrected for the int8 weight rounding (Nagel et al., 2019).
    pub bias_correction: bool,
    /// What the raw-input trial found (`--fold-scaler`), if it ran.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub raw_input: Option<RawInputChoice>,
    /// How percentiles are ranked.
    pub percentile_definition: &'static str,
    /// Calibration rows.
    pub rows: usize,
    /// The rule that marks a range as set by a few far values.
    pub far_rule: String,
    /// Each tensor: the scaled input, then each layer's output.
    pub tensors: Vec<TensorStats>,
    /// One line per range that a few far values set (also printed on stderr).
    pub warnings: Vec<String>,
}

impl CalibrationReport {
    /// The report of a calibration by `method` on `rows` rows that saw `tensors` and gave
    /// `warnings` (the parts of a [`crate::pack::Int8Pack`]).
    pub fn new(
        method: RangeMethod,
        bias_correction: bool,
        raw_input: Option<RawInputChoice>,
        rows: usize,
        tensors: Vec<TensorStats>,
        warnings: Vec<String>,
    ) -> Self {
        CalibrationReport {
            method: method.to_string(),
            bias_correction,
            raw_input,
            percentile_definition:
                "Hyndman & Fan (1996) definition 7, numpy.percentile's default: rank (n - 1) * p / 100, linear between neighbours",
            rows,
            far_rule: format!(
                "far: more than the core's width beyond the core (all values but the {}% (at least one row's worth) lowest and highest); \
                 dominated: there are far values and the range is at least {DOMINATED_SPREAD} times as wide as the other values",
                CORE_TRIM * 100.0
            ),
            tensors,
            warnings,
        }
    }
}

/// The note on the raw-input trial.
pub fn raw_input_line(c: &RawInputChoice) -> String {
    let db = |v: Option<f64>| v.map_or_else(|| "exact".into(), |d| format!("{d:.1} dB"));
    match &c.reason {
        Some(why) => format!("--fold-scaler: kept the scaled input: {why}"),
        None if c.folded_sqnr_db.is_none() && c.scaled_sqnr_db.is_none() => {
            "raw integer input, the scaler folded into layer 1 (not measured)".into()
        }
        None => format!(
            "--fold-scaler: kept the {} input (SQNR of the last layer's output on the calibration rows: raw input with the scaler folded into layer 1 {}, scaled input {})",
            if c.kept == "folded" { "raw integer" } else { "scaled" },
            db(c.folded_sqnr_db),
            db(c.scaled_sqnr_db)
        ),
    }
}

fn far(t: &TensorStats) -> String {
    let n = t.far();
    if n == 0 {
        return "0".into();
    }
    let rows = t.far_row_count;
    format!("{n} in {rows} row{}", if rows == 1 { "" } else { "s" })
}

/// The table: one row per tensor.
pub fn render(r: &CalibrationReport) -> String {
    let mut t = Table::new();
    t.load_preset(UTF8_BORDERS_ONLY);
    t.set_header([
        "tensor",
        "values",
        "range",
        "clipped (below/above)",
        "far values",
        "spread",
    ]);
    for s in &r.tensors {
        t.add_row(vec![
            Cell::new(&s.tensor),
            Cell::new(s.values).set_alignment(CellAlignment::Right),
            Cell::new(format!(
                "[{}, {}]",
                num(f64::from(s.min)),
                num(f64::from(s.max))
            )),
            Cell::new(format!("{} / {}", s.clipped_below, s.clipped_above))
                .set_alignment(CellAlignment::Right),
            Cell::new(far(s)).set_alignment(CellAlignment::Right),
            Cell::new(s.spread.map_or_else(|| "-".into(), num)).set_alignment(CellAlignment::Right),
        ]);
    }
    format!(
        "calibration ({}{}, {} rows; spread: the range's width over the width of the values that are not far)\n{t}\n",
        r.method,
        if r.bias_correction { ", biases corrected" } else { "" },
        r.rows
    )
}
