//! The instruction rates `kinglet inspect` estimates from (`converter/src/report/cycles.rs`,
//! compiled into this crate as [`cycles`]), fitted to this run's counts, and the check of the
//! estimate against every measured whole-model count.
use crate::Target;
use std::collections::BTreeMap;

/// The converter's estimator itself, so that the harness checks the code `kinglet inspect`
/// runs, not a copy of it.
#[path = "../../../converter/src/report/cycles.rs"]
#[allow(dead_code)]
pub mod cycles;

use cycles::{Core, Feed, Layer, Rates, Weights};

/// A measured model: raw input features and (inputs, outputs) of each layer, read from its blob.
#[derive(Clone, Debug)]
pub struct Shape {
    /// Raw input features.
    pub features: usize,
    /// Each layer's widths and whether its weights are int4.
    pub layers: Vec<Layer>,
}

/// The shapes of every model the benchmark runs, by case name (`digits`, `digits-f32`,
/// `i8-784x100`, ...).
pub type Shapes = BTreeMap<String, Shape>;

/// The whole-model cases of int8 models (`bench`) and of f32 models (`bench_f32`).
pub const INT8_MODELS: [&str; 5] = ["digits", "vibration", "i8-784x100", "i8-64x32", "i8-18x40"];
/// The whole-model cases of int8 models with int4 weights (`bench_i4`), checked with the int8
/// rates (not fitted to: `per_mac_int4` comes from the layer counts).
pub const INT4_MODELS: [&str; 1] = ["digits-i4"];
/// The whole-model cases of int8 models with an int16 input tensor (`bench_i16`), checked with
/// the int8 rates (not fitted to: `per_mac_int16_input` comes from the layer counts).
pub const INT16_INPUT_MODELS: [&str; 1] = ["digits-i16in"];
/// The f32 whole-model cases (Cortex-M4F only; `f32-784x100` does not fit the M0).
pub const F32_MODELS: [&str; 5] = [
    "digits-f32",
    "vibration-f32",
    "f32-784x100",
    "f32-64x32",
    "f32-18x40",
];

/// Least squares `min Σ (a_i · x − b_i)²` over the rows `(a_i, b_i)`, by the normal equations on
/// columns scaled to unit size (the rows here are a handful, the unknowns at most 5).
fn least_squares<const N: usize>(rows: &[([f64; N], f64)]) -> Result<[f64; N], String> {
    if rows.len() < N {
        return Err(format!(
            "the rate fit has {} data points for {N} unknowns",
            rows.len()
        ));
    }
    let mut scale = [0f64; N];
    for (a, _) in rows {
        for (s, v) in scale.iter_mut().zip(a) {
            *s = s.max(v.abs());
        }
    }
    if scale.contains(&0.0) {
        return Err("the rate fit has a column of zeros".into());
    }
    // M = AᵀA, v = Aᵀb on the scaled columns.
    let mut m = [[0f64; N]; N];
    let mut v = [0f64; N];
    for (a, b) in rows {
        let a: Vec<f64> = a.iter().zip(&scale).map(|(x, s)| x / s).collect();
        for i in 0..N {
            v[i] += a[i] * b;
            for j in 0..N {
                m[i][j] += a[i] * a[j];
            }
        }
    }
    // Gaussian elimination with partial pivoting.
    for c in 0..N {
        let p = (c..N)
            .max_by(|&i, &j| m[i][c].abs().total_cmp(&m[j][c].abs()))
            .unwrap_or(c);
        if m[p][c].abs() < 1e-12 {
            return Err("the rate fit has no unique solution".into());
        }
        m.swap(c, p);
        v.swap(c, p);
        for r in c + 1..N {
            let f = m[r][c] / m[c][c];
            let pivot = m[c];
            for (x, p) in m[r].iter_mut().zip(pivot).skip(c) {
                *x -= f * p;
            }
            v[r] -= f * v[c];
        }
    }
    let mut x = [0f64; N];
    for c in (0..N).rev() {
        let tail: f64 = (c + 1..N).map(|k| m[c][k] * x[k]).sum();
        x[c] = (v[c] - tail) / m[c][c];
    }
    for (x, s) in x.iter_mut().zip(scale) {
        *x /= s;
    }
    Ok(x)
}

/// The fit of `rows` that makes the largest residual smallest (minimax), by Lawson's
/// iteratively reweighted least squares (C. L. Lawson, 1961; the weights move to the rows with
/// the largest residuals until they balance). Rows whose residual is already 0 keep a tiny
/// weight so that the system stays determined.
fn minimax<const N: usize>(rows: &[([f64; N], f64)]) -> Result<[f64; N], String> {
    let mut w = vec![1.0 / rows.len() as f64; rows.len()];
    let mut x = least_squares(rows)?;
    for _ in 0..500 {
        let weighted: Vec<([f64; N], f64)> = rows
            .iter()
            .zip(&w)
            .map(|((a, b), w)| (a.map(|v| v * w.sqrt()), b * w.sqrt()))
            .collect();
        x = least_squares(&weighted)?;
        let r: Vec<f64> = rows
            .iter()
            .map(|(a, b)| (a.iter().zip(&x).map(|(a, x)| a * x).sum::<f64>() - b).abs())
            .collect();
        let total: f64 = w.iter().zip(&r).map(|(w, r)| w * r).sum();
        if total <= 0.0 {
            break;
        }
        for (w, r) in w.iter_mut().zip(&r) {
            *w = (*w * r / total).max(1e-12);
        }
    }
    Ok(x)
}

fn round2(v: f64) -> f64 {
    (v * 100.0).round() / 100.0
}

fn pad4(v: usize) -> f64 {
    v.div_ceil(4) as f64 * 4.0
}

fn shape<'a>(shapes: &'a Shapes, name: &str) -> Result<&'a Shape, String> {
    shapes.get(name).ok_or(format!("no shape for {name}"))
}

/// The layer rates (per MAC, per row, per partial-group row, per input, per layer) of
/// `weights` on `t`, fitted to every layer of `models` counted alone (`MODEL-L1`, ...), on
/// relative error.
fn layer_rates(t: &Target, shapes: &Shapes, models: &[&str]) -> Result<[f64; 5], String> {
    let mut rows = Vec::new();
    for m in models {
        let s = shape(shapes, m)?;
        for (k, l) in s.layers.iter().enumerate() {
            let (i, o) = (l.inputs, l.outputs);
            let Some(c) = t.bench.case(&format!("{m}-L{}", k + 1), "layer-kernel") else {
                continue;
            };
            let y = c.count as f64;
            let partial = if i % 4 == 0 { 0.0 } else { pad4(o) };
            let a = [pad4(i) * pad4(o), pad4(o), partial, pad4(i), 1.0];
            rows.push((a.map(|v| v / y), 1.0));
        }
    }
    least_squares(&rows)
}

/// The variant that counts a whole inference of a model through `feed`.
fn whole_variant(feed: Feed) -> &'static str {
    match feed {
        Feed::F32 => "model-kernel",
        Feed::Integer => "model-infer-i16",
    }
}

/// One target's rates for `weights` models through `feed`: the layer rates from every layer,
/// then per feature, per class and the fixed part from the whole-model counts less the
/// estimated layers (relative error).
fn fit(
    t: &Target,
    shapes: &Shapes,
    weights: Weights,
    feed: Feed,
    layers: [f64; 5],
) -> Result<Rates, String> {
    let (models, target, core): (&[&str], _, _) = match (weights, t.bench.kernel == "dsp") {
        (Weights::Int8, true) => (&INT8_MODELS, "Cortex-M4 (DSP)", Core::M4),
        (Weights::Int8, false) => (&INT8_MODELS, "Cortex-M0", Core::M0),
        (Weights::F32, true) => (&F32_MODELS, "Cortex-M4F (FPU)", Core::M4),
        (Weights::F32, false) => return Err("f32 rates are fitted on the FPU target only".into()),
    };
    let [per_mac, per_row, per_partial_row, per_input, per_layer] = layers.map(round2);
    // int4 layers: the int8 rate plus what the int4 inner loop costs more per MAC on the same
    // layer (the kernels share the block loop and requantisation).
    let per_mac_int4 = match weights {
        Weights::Int8 => {
            let k = |name| {
                t.bench
                    .per_mac(name, "kernel")
                    .ok_or(format!("{}: no {name} kernel count", t.name))
            };
            round2(per_mac + k("i4-784x100")? - k("i8-784x100")?)
        }
        Weights::F32 => per_mac,
    };
    // The first layer of an int16-input model: likewise, from the int16-input kernel's count
    // on the same 784 → 100 shape (its own plain-Rust kernel, `runtime/src/dense/wide.rs`).
    let per_mac_int16_input = match weights {
        Weights::Int8 => {
            let k = |name| {
                t.bench
                    .per_mac(name, "kernel")
                    .ok_or(format!("{}: no {name} kernel count", t.name))
            };
            round2(per_mac + k("i16in-784x100")? - k("i8-784x100")?)
        }
        Weights::F32 => per_mac,
    };
    let mut r = Rates {
        target,
        core,
        weights,
        feed,
        per_mac,
        per_mac_int4,
        per_mac_int16_input,
        per_row,
        per_partial_row,
        per_input,
        per_layer,
        per_feature: 0.0,
        per_class: 0.0,
        fixed: 0.0,
    };
    let mut rows = Vec::new();
    for m in models {
        let Some(c) = t.bench.case(m, whole_variant(feed)) else {
            continue;
        };
        let s = shape(shapes, m)?;
        // The layers as estimated (the other rates are still 0 here).
        let rest = c.count as f64 - cycles::instructions(&r, 0, &s.layers);
        let classes = s.layers.last().map_or(0, |l| l.outputs) as f64;
        let y = c.count as f64;
        rows.push(([s.features as f64 / y, classes / y, 1.0 / y], rest / y));
    }
    // Minimax rather than least squares: the check holds the largest error, not the mean.
    let [per_feature, per_class, fixed] = minimax(&rows)?;
    r.per_feature = round2(per_feature);
    r.per_class = round2(per_class);
    r.fixed = round2(fixed);
    Ok(r)
}

/// Every set of rates: int8 on each target through both input paths, f32 on the FPU target.
pub fn all(targets: &[Target], shapes: &Shapes) -> Result<Vec<Rates>, String> {
    let mut out = Vec::new();
    for t in targets {
        let l8 = layer_rates(t, shapes, &INT8_MODELS)?;
        for feed in [Feed::F32, Feed::Integer] {
            out.push(fit(t, shapes, Weights::Int8, feed, l8)?);
        }
        if t.bench.kernel == "dsp" {
            let lf = layer_rates(t, shapes, &F32_MODELS)?;
            out.push(fit(t, shapes, Weights::F32, Feed::F32, lf)?);
        }
    }
    Ok(out)
}

/// One measured whole-model count and the estimate of it.
pub struct Checked {
    /// Target (`m4`, `m0`).
    pub target: &'static str,
    /// Model case name.
    pub model: String,
    /// Input path.
    pub feed: Feed,
    /// Measured instructions.
    pub measured: u64,
    /// The converter's estimate.
    pub estimated: u64,
}

impl Checked {
    /// Relative error of the estimate.
    pub fn error(&self) -> f64 {
        (self.estimated as f64 - self.measured as f64) / self.measured.max(1) as f64
    }

    /// Whether it is within the estimator's tolerance.
    pub fn ok(&self) -> bool {
        self.error().abs() <= cycles::TOLERANCE
    }
}

/// The estimate, through the converter's [`cycles::estimate`] with `rates`, of every measured
/// whole-model count.
pub fn check(targets: &[Target], shapes: &Shapes, rates: &[Rates]) -> Result<Vec<Checked>, String> {
    let mut out = Vec::new();
    for t in targets {
        let dsp = t.bench.kernel == "dsp";
        let target = if dsp { Core::M4 } else { Core::M0 };
        let mine: Vec<Rates> = rates.iter().copied().filter(|r| r.core == target).collect();
        for (weights, models) in [
            (Weights::Int8, &INT8_MODELS[..]),
            (Weights::Int8, &INT4_MODELS[..]),
            (Weights::Int8, &INT16_INPUT_MODELS[..]),
            (Weights::F32, &F32_MODELS[..]),
        ] {
            for m in models {
                let s = shape(shapes, m)?;
                for e in cycles::estimate(&mine, weights, s.features, &s.layers, None) {
                    let Some(c) = t.bench.case(m, whole_variant(e.feed)) else {
                        continue;
                    };
                    out.push(Checked {
                        target: t.name,
                        model: (*m).to_string(),
                        feed: e.feed,
                        measured: c.count,
                        estimated: e.instructions,
                    });
                }
            }
        }
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn least_squares_recovers_an_exact_fit_and_fits_an_overdetermined_one() {
        // y = 1.5 a + 90 b + 300 on four points: recovered exactly.
        let f = |a: f64, b: f64| 1.5 * a + 90.0 * b + 300.0;
        let pts = [
            (78400.0, 100.0),
            (2048.0, 32.0),
            (4096.0, 64.0),
            (320.0, 10.0),
        ];
        let rows: Vec<([f64; 3], f64)> = pts.iter().map(|&(a, b)| ([a, b, 1.0], f(a, b))).collect();
        let x = least_squares(&rows).unwrap();
        assert!(
            (x[0] - 1.5).abs() < 1e-6 && (x[1] - 90.0).abs() < 1e-3 && (x[2] - 300.0).abs() < 1e-2
        );
        // The mean of 1, 2, 3 minimises the squared distance to them.
        let m = least_squares(&[([1.0], 1.0), ([1.0], 2.0), ([1.0], 3.0)]).unwrap();
        assert!((m[0] - 2.0).abs() < 1e-12);
        assert!(least_squares::<2>(&[([1.0, 2.0], 3.0), ([2.0, 4.0], 6.0)]).is_err());
        assert!(least_squares::<2>(&[([1.0, 2.0], 3.0)]).is_err());
    }

    #[test]
    fn minimax_balances_the_largest_residuals() {
        // One constant for 0, 1, 10: least squares gives the mean (3.67, worst residual 6.33),
        // minimax the midrange 5 (worst residual 5, reached at both ends).
        let rows = [([1.0], 0.0), ([1.0], 1.0), ([1.0], 10.0)];
        let ls = least_squares(&rows).unwrap()[0];
        let mm = minimax(&rows).unwrap()[0];
        assert!((ls - 11.0 / 3.0).abs() < 1e-9);
        assert!((mm - 5.0).abs() < 1e-3, "{mm}");
    }
}
