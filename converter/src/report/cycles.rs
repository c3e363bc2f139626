//! An estimate of the instructions (≈ cycles) one inference takes on each Cortex-M target,
//! from rates measured by `scripts/kernel-bench.sh` (exact guest instruction counts under QEMU
//! 7.2, BENCHMARKS.md). It is an estimate from an instruction count: real parts take more than
//! one cycle for some instructions (loads, multiplies on a small M0+ multiplier, flash wait
//! states) and less for none, so read it as a lower bound near the right order of magnitude.
use serde::Serialize;

/// Measured rates of one target and precision: instructions per MAC, per output row (bias,
/// requantisation, store, loop), per input feature (scaling and quantisation) and per class
/// (dequantisation, softmax), plus a fixed part per inference.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Rates {
    /// Target name as printed.
    pub target: &'static str,
    /// Instructions per multiply-accumulate.
    pub per_mac: f64,
    /// Instructions per output row of a layer.
    pub per_row: f64,
    /// Instructions per input feature.
    pub per_input: f64,
    /// Instructions per class.
    pub per_class: f64,
    /// Instructions per inference besides the above.
    pub fixed: f64,
}

/// int8 models (kernel-bench, opt-level "s"): fitted to the 784×100 and 64×32 layers and the
/// digits and vibration whole-model counts (f32 features in; per input and per class solved
/// from the two models' whole − Σ layers, 2,822 and 1,032 instructions on the M4, 80,990 and
/// 22,532 on the M0, with the fixed part held).
pub const INT8: [Rates; 2] = [
    Rates {
        target: "Cortex-M4 (DSP)",
        per_mac: 1.38,
        per_row: 93.0,
        per_input: 26.0,
        per_class: 85.0,
        fixed: 300.0,
    },
    Rates {
        target: "Cortex-M0",
        per_mac: 3.59,
        per_row: 189.0,
        per_input: 987.0,
        per_class: 1681.0,
        fixed: 1000.0,
    },
];

/// f32 models: the Cortex-M4F FPU kernel (the M0 has no FPU; soft-float is not estimated).
pub const F32: [Rates; 1] = [Rates {
    target: "Cortex-M4F (FPU)",
    per_mac: 1.25,
    per_row: 54.0,
    per_input: 73.0,
    per_class: 93.0,
    fixed: 300.0,
}];

/// One target's estimate.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct CycleEstimate {
    /// Target.
    pub target: String,
    /// Estimated instructions per inference (≈ cycles at one instruction per cycle).
    pub instructions: u64,
}

/// The estimate for a model with `layers` (inputs, outputs) and `inputs` features.
pub fn estimate(rates: &[Rates], inputs: usize, layers: &[(usize, usize)]) -> Vec<CycleEstimate> {
    let classes = layers.last().map_or(0, |l| l.1);
    rates
        .iter()
        .map(|r| {
            let dense: f64 = layers
                .iter()
                .map(|&(i, o)| r.per_mac * (i * o) as f64 + r.per_row * o as f64)
                .sum();
            let total =
                dense + r.per_input * inputs as f64 + r.per_class * classes as f64 + r.fixed;
            CycleEstimate {
                target: r.target.into(),
                instructions: total.round() as u64,
            }
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn estimate_adds_the_rates() {
        let r = Rates {
            target: "t",
            per_mac: 2.0,
            per_row: 10.0,
            per_input: 1.0,
            per_class: 3.0,
            fixed: 5.0,
        };
        // 4→3→2: MACs 12 + 6 = 18 (36), rows 5 (50), inputs 4, classes 2 (6), fixed 5.
        assert_eq!(
            estimate(&[r], 4, &[(4, 3), (3, 2)])[0].instructions,
            36 + 50 + 4 + 6 + 5
        );
    }
}
