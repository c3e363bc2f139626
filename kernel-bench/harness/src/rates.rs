//! The instruction rates `kinglet inspect` estimates cycles from
//! (`converter/src/report/cycles.rs`), fitted to this run's counts.
use crate::Target;

/// One target's rates, as `cycles::Rates` has them.
pub struct Rates {
    /// Target name as `kinglet inspect` prints it.
    pub target: &'static str,
    /// Instructions per multiply-accumulate.
    pub per_mac: f64,
    /// Instructions per output row of a layer.
    pub per_row: f64,
    /// Instructions per input feature.
    pub per_input: f64,
    /// Instructions per class.
    pub per_class: f64,
    /// Instructions per inference besides the above (held, not fitted).
    pub fixed: f64,
    /// What the per-input and per-class rates were solved from: whole − Σ layers of the two
    /// models (digits, vibration), when they were.
    pub overheads: Option<(u64, u64)>,
}

/// Inputs and classes of the two example models, read from their blobs.
#[derive(Clone, Copy)]
pub struct Shapes {
    /// (inputs, classes) of digits.
    pub digits: (usize, usize),
    /// (inputs, classes) of vibration.
    pub vibration: (usize, usize),
}

/// Solves `a·x1 + b·y1 = c1`, `a·x2 + b·y2 = c2`.
fn solve(x1: f64, y1: f64, c1: f64, x2: f64, y2: f64, c2: f64) -> Result<(f64, f64), String> {
    let det = x1 * y2 - x2 * y1;
    if det.abs() < 1e-9 {
        return Err("the rate fit has no unique solution".into());
    }
    Ok(((c1 * y2 - c2 * y1) / det, (x1 * c2 - x2 * c1) / det))
}

/// Per MAC and per row from the 784×100 and 64×32 layers of `kind` (`i8`, `f32`).
fn layer_rates(t: &Target, kind: &str) -> Result<(f64, f64), String> {
    let get = |n: usize, m: usize| {
        t.bench
            .case(&format!("{kind}-{n}x{m}"), "kernel")
            .map(|c| c.count as f64)
            .ok_or(format!("{}: no {kind}-{n}x{m} kernel count", t.name))
    };
    let (big, small) = (get(784, 100)?, get(64, 32)?);
    solve(78400.0, 100.0, big, 2048.0, 32.0, small)
}

fn round2(v: f64) -> f64 {
    (v * 100.0).round() / 100.0
}

/// Per input and per class from the whole − Σ layers of the two example models (`suffix`
/// names their cases: `""` int8, `"-f32"` f32), with the fixed part held: it cannot be told
/// apart from the other two with two models.
fn model_rates(
    t: &Target,
    shapes: Shapes,
    suffix: &str,
    fixed: f64,
) -> Result<(f64, f64, (u64, u64)), String> {
    let overhead = |m: &str| {
        let m = format!("{m}{suffix}");
        t.bench
            .whole_and_layers(&m)
            .map(|(whole, layers)| whole.saturating_sub(layers))
            .ok_or(format!("{}: no {m} whole-model count", t.name))
    };
    let (od, ov) = (overhead("digits")?, overhead("vibration")?);
    let ((di, dc), (vi, vc)) = (shapes.digits, shapes.vibration);
    let (per_input, per_class) = solve(
        di as f64,
        dc as f64,
        od as f64 - fixed,
        vi as f64,
        vc as f64,
        ov as f64 - fixed,
    )?;
    Ok((per_input, per_class, (od, ov)))
}

/// The int8 rates of one target: per MAC and per row from the two synthetic layers, per input
/// and per class from the two whole-model counts (f32 features in) less their layers.
pub fn int8(t: &Target, shapes: Shapes) -> Result<Rates, String> {
    let (per_mac, per_row) = layer_rates(t, "i8")?;
    let (target, fixed) = if t.bench.kernel == "dsp" {
        ("Cortex-M4 (DSP)", 300.0)
    } else {
        ("Cortex-M0", 1000.0)
    };
    let (per_input, per_class, overheads) = model_rates(t, shapes, "", fixed)?;
    Ok(Rates {
        target,
        per_mac: round2(per_mac),
        per_row: per_row.round(),
        per_input: per_input.round(),
        per_class: per_class.round(),
        fixed,
        overheads: Some(overheads),
    })
}

/// The f32 rates of the FPU target, fitted like int8 to the f32 layers and the f32 twins of
/// the two example models.
pub fn f32(t: &Target, shapes: Shapes) -> Result<Rates, String> {
    let (per_mac, per_row) = layer_rates(t, "f32")?;
    let fixed = 300.0;
    let (per_input, per_class, overheads) = model_rates(t, shapes, "-f32", fixed)?;
    Ok(Rates {
        target: "Cortex-M4F (FPU)",
        per_mac: round2(per_mac),
        per_row: per_row.round(),
        per_input: per_input.round(),
        per_class: per_class.round(),
        fixed,
        overheads: Some(overheads),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn solve_recovers_a_known_pair() {
        // 1.5 per MAC and 90 per row on both layer shapes.
        let c = |n: f64, m: f64| 1.5 * n + 90.0 * m;
        let (a, b) = solve(
            78400.0,
            100.0,
            c(78400.0, 100.0),
            2048.0,
            32.0,
            c(2048.0, 32.0),
        )
        .unwrap();
        assert!((a - 1.5).abs() < 1e-9 && (b - 90.0).abs() < 1e-6);
        assert!(solve(1.0, 2.0, 3.0, 2.0, 4.0, 6.0).is_err());
    }
}
