//! What `pack` tells the user about a calibration: one warning per range that a few far values
//! set ([`super::spread`]), each naming the tensor, how many values set it and from which rows,
//! how much narrower the other values lie, and the one option that leaves those values out.
use super::calibrate::{Calibration, RangeMethod};
use super::percentile::percentile_excluding;
use super::spread::TensorStats;

/// A number in a message: four significant digits at most, plain in `[0.001, 10000)` (trailing
/// zeros dropped), else with an exponent (`6.45e4`).
pub fn num(x: f64) -> String {
    let a = x.abs();
    if x == 0.0 || !x.is_finite() {
        return format!("{x}");
    }
    if !(1e-3..1e4).contains(&a) {
        return format!("{x:.2e}");
    }
    let decimals = (3 - a.log10().floor() as i32).clamp(0, 3) as usize;
    let s = format!("{x:.decimals$}");
    if s.contains('.') {
        s.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        s
    }
}

/// The rows a message names: `row 51 (1-based, header not counted)`, `rows 3, 9 and 4 more
/// (…)`, or for a `.npy` file `row index 50`, `row indices 2, 50`.
pub fn rows_text(source: &str, rows: &[usize], count: usize) -> String {
    let npy = source.to_ascii_lowercase().ends_with(".npy");
    let shown: Vec<String> = rows
        .iter()
        .map(|&r| if npy { r } else { r + 1 }.to_string())
        .collect();
    let mut list = shown.join(", ");
    if count > rows.len() {
        list.push_str(&format!(" and {} more", count - rows.len()));
    }
    match (npy, count) {
        (true, 1) => format!("row index {list}"),
        (true, _) => format!("row indices {list}"),
        (false, 1) => format!("row {list} (1-based, header not counted)"),
        (false, _) => format!("rows {list} (1-based, header not counted)"),
    }
}

/// The largest percentile that leaves out the far values of every dominated tensor, or `None`
/// when no tensor is dominated.
pub fn suggested_percentile(tensors: &[TensorStats]) -> Option<f64> {
    tensors
        .iter()
        .filter(|t| t.dominated)
        .filter_map(|t| percentile_excluding(t.values, t.far_per_side()))
        .reduce(f64::min)
}

/// The command-line option(s) that select percentile `p`, given the method used.
pub fn percentile_option(method: RangeMethod, p: f64) -> String {
    match method {
        RangeMethod::MinMax | RangeMethod::LeastError => {
            format!("--range percentile --percentile {p}")
        }
        RangeMethod::Percentile(_) => format!("--percentile {p}"),
    }
}

/// One warning per dominated tensor of `cal` (calibrated on `source`).
pub fn warnings(cal: &Calibration, source: &str) -> Vec<String> {
    let fix = match suggested_percentile(&cal.tensors) {
        Some(p) => format!("use {} to clip them", percentile_option(cal.method, p)),
        None => "drop those rows".into(),
    };
    cal.tensors
        .iter()
        .filter(|t| t.dominated)
        .map(|t| warning(t, source, &fix))
        .collect()
}

fn warning(t: &TensorStats, source: &str, fix: &str) -> String {
    let spread = t.spread.unwrap_or(f64::INFINITY);
    let steps = 255.0 / spread;
    let share = if steps < 1.0 {
        "under one of the 255 int8 steps".to_string()
    } else {
        format!("about {steps:.0} of the 255 int8 steps")
    };
    format!(
        "{source}: {}: the range [{}, {}] is set by {} of {} values in {}; the other {} lie \
         within [{}, {}], {} times narrower ({share}); {fix}",
        t.tensor,
        num(f64::from(t.min)),
        num(f64::from(t.max)),
        t.far(),
        t.values,
        rows_text(source, &t.far_rows, t.far_row_count),
        t.values - t.far(),
        num(f64::from(t.others_min)),
        num(f64::from(t.others_max)),
        num(spread),
    )
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::quantise::calibrate::TensorRange;

    fn dominated_input() -> TensorStats {
        // 50 rows of 3 ordinary values and one row far out.
        let mut v: Vec<f32> = (0..150).map(|i| (i % 7) as f32 - 3.0).collect();
        v.extend([4e4, 5e4, 6e4]);
        let mut sorted = v.clone();
        sorted.sort_by(f32::total_cmp);
        TensorStats::of(
            "input".into(),
            &v,
            &sorted,
            3,
            TensorRange {
                min: -3.0,
                max: 6e4,
            },
        )
    }

    #[test]
    fn numbers_and_rows_in_messages() {
        assert_eq!(num(7.59e34), "7.59e34");
        assert_eq!(num(64_482.691), "6.45e4");
        assert_eq!(num(9_929.542), "9930");
        assert_eq!(num(643.788), "643.8");
        assert_eq!(num(-1.928_4), "-1.928");
        assert_eq!(num(0.705), "0.705");
        assert_eq!(num(6.0), "6");
        assert_eq!(num(0.0), "0");
        assert_eq!(num(1e-5), "1.00e-5");
        assert_eq!(
            rows_text("a.csv", &[50], 1),
            "row 51 (1-based, header not counted)"
        );
        assert_eq!(
            rows_text("a.csv", &[2, 8], 6),
            "rows 3, 9 and 4 more (1-based, header not counted)"
        );
        assert_eq!(rows_text("a.NPY", &[50], 1), "row index 50");
        assert_eq!(rows_text("a.npy", &[1, 50], 2), "row indices 1, 50");
    }

    #[test]
    fn one_warning_names_the_tensor_the_count_the_spread_and_the_option() {
        let t = dominated_input();
        assert!(t.dominated);
        let cal = Calibration {
            method: RangeMethod::MinMax,
            ranges: vec![],
            tensors: vec![t],
            scaled_input: vec![],
            means: vec![],
            pre_activation: vec![],
        };
        // 153 values, 3 far above: 100 · (152 - 3) / 152 = 98.026…
        assert_eq!(suggested_percentile(&cal.tensors), Some(98.02));
        let w = warnings(&cal, "cal.csv");
        assert_eq!(
            w,
            vec![
                "cal.csv: input: the range [-3, 6.00e4] is set by 3 of 153 values in row 51 \
                 (1-based, header not counted); the other 150 lie within [-3, 3], 1.00e4 times \
                 narrower (under one of the 255 int8 steps); use --range percentile \
                 --percentile 98.02 to clip them"
                    .to_string()
            ]
        );
        let cal = Calibration {
            method: RangeMethod::Percentile(99.99),
            ..cal
        };
        assert!(warnings(&cal, "cal.csv")[0].ends_with("use --percentile 98.02 to clip them"));
    }
}
