//! An estimate of the instructions one inference executes on each Cortex-M target and input
//! path, from rates fitted to the exact guest instruction counts under QEMU 7.2 of
//! `bash scripts/kernel-bench.sh` (BENCHMARKS.md); the measurement harness writes the rates
//! ([`RATES`]) from the same run as the tables, computes its estimate of every measured model
//! with [`estimate`] (this file is compiled into the harness), and its `--check` fails when the
//! estimate is more than [`TOLERANCE`] off a measured whole-model count.
//!
//! It is an instruction count, not a cycle count. [`Latency`] turns it into a time range at a
//! given clock with stated cycles-per-instruction assumptions ([`CPI`]), which are figures
//! from memory of the cores' timing, not measurements.
//!
//! The model: each dense layer costs `per_mac` per multiply-accumulate of its weight matrix
//! padded to the `Blocked4x4` layout (both widths rounded up to 4: what the kernels loop
//! over; `per_mac_int4` instead for a layer with int4 weights, `Nibble4x4`, padded alike),
//! `per_row` per padded output row, `per_partial_row` more per padded row when the
//! input width is not a multiple of 4 (the kernels finish the last, partial group of inputs
//! apart), `per_input` per padded input (the `128·Σx` correction of the int8 kernels) and
//! `per_layer`; the rest of an inference costs
//! `per_feature` per raw input feature (scaling and quantisation), `per_class` per score
//! (dequantisation, softmax, argmax) and `fixed`. The layer rates are fitted to every
//! measured layer (two synthetic layers and the examples' layers) and the rest to the whole
//! models less the estimated layers, by least squares on relative error; `per_mac_int4` is
//! `per_mac` plus the difference between the int4 and the int8 kernel's instructions per MAC
//! on the same 784 → 100 layer (the int4 kernels share the int8 ones' block loop and
//! requantisation, so only the inner loop differs), and is checked against the whole digits
//! model with int4 weights. `per_mac_int16_input` is found the same way from the int16-input
//! first-layer kernel (`runtime/src/dense/wide.rs`) on 784 → 100, and costs the first layer of
//! a blob with an int16 input tensor.
use serde::Serialize;

/// How far (relative) the estimate may be from a measured whole-model count: what the
/// measurement harness's `--check` holds it to on every model it measures.
pub const TOLERANCE: f64 = 0.05;

/// What the features arrive as.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Feed {
    /// `Input::F32`: float features, scaled and quantised in float.
    F32,
    /// `Input::I16` or `Input::U8`: raw integer counts through the integer input path
    /// (measured with `i16`; `u8` takes the same path).
    Integer,
}

impl Feed {
    /// As printed.
    pub fn name(self) -> &'static str {
        match self {
            Feed::F32 => "f32 features",
            Feed::Integer => "i16/u8 counts",
        }
    }
}

/// Which models a set of rates is for.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Weights {
    /// int8 models.
    Int8,
    /// f32 models.
    F32,
}

/// Measured rates of one target, weight precision and input path (instructions).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Rates {
    /// Target name as printed.
    pub target: &'static str,
    /// Core class, for the [`CPI`] assumption.
    pub core: Core,
    /// Models these rates are for.
    pub weights: Weights,
    /// Input path.
    pub feed: Feed,
    /// Per multiply-accumulate of the padded weight matrix.
    pub per_mac: f64,
    /// Per multiply-accumulate of the padded weight matrix of a layer with int4 weights.
    pub per_mac_int4: f64,
    /// Per multiply-accumulate of the padded weight matrix of the first layer of a model with
    /// an int16 input tensor (format version 7, `runtime/src/dense/wide.rs`): `per_mac` plus
    /// the difference between that kernel's and the int8 kernel's instructions per MAC on the
    /// 784 → 100 layer, as `per_mac_int4`.
    pub per_mac_int16_input: f64,
    /// Per padded output row of a layer.
    pub per_row: f64,
    /// Per padded output row more, when the layer's input width is not a multiple of 4.
    pub per_partial_row: f64,
    /// Per padded input of a layer.
    pub per_input: f64,
    /// Per layer.
    pub per_layer: f64,
    /// Per raw input feature of the model.
    pub per_feature: f64,
    /// Per score (the last layer's width).
    pub per_class: f64,
    /// Per inference besides the above.
    pub fixed: f64,
}

/// The core classes the rates were measured on.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Core {
    /// Cortex-M4F (`thumbv7em-none-eabihf`).
    M4,
    /// Cortex-M0 (`thumbv6m-none-eabi`).
    M0,
}

/// Cycles per instruction assumed for a latency range: (core, low, high, where it comes from).
pub const CPI: [(Core, f64, f64, &str); 2] = [
    (
        Core::M4,
        1.0,
        2.0,
        "CPI 1-2 for the Cortex-M4, from memory of its timing (1-cycle SMLAD/VMLA, 2-cycle LDR, \
         1+n LDM; more with flash wait states)",
    ),
    (
        Core::M0,
        1.0,
        2.5,
        "CPI 1-2.5 for the Cortex-M0, from memory of its timing (2-cycle loads, 3-cycle taken \
         branches; a part with the small 32-cycle multiplier is slower still)",
    ),
];

// kb-harness:begin rates: generated by `bash scripts/kernel-bench.sh --write`, do not edit
/// Fitted by the measurement harness (kernel-bench, opt-level "s"): the layer rates to every
/// layer counted alone, the rest to the whole-model counts (digits, vibration and the
/// synthetic one-layer models, each through the input path named) less the estimated layers.
pub const RATES: [Rates; 5] = [
    Rates {
        target: "Cortex-M4 (DSP)",
        core: Core::M4,
        weights: Weights::Int8,
        feed: Feed::F32,
        per_mac: 1.3,
        per_mac_int4: 1.43,
        per_mac_int16_input: 2.93,
        per_row: 77.29,
        per_partial_row: 27.3,
        per_input: 9.33,
        per_layer: 288.46,
        per_feature: 26.88,
        per_class: 87.03,
        fixed: 392.79,
    },
    Rates {
        target: "Cortex-M4 (DSP)",
        core: Core::M4,
        weights: Weights::Int8,
        feed: Feed::Integer,
        per_mac: 1.3,
        per_mac_int4: 1.43,
        per_mac_int16_input: 2.93,
        per_row: 77.29,
        per_partial_row: 27.3,
        per_input: 9.33,
        per_layer: 288.46,
        per_feature: 70.2,
        per_class: 88.87,
        fixed: 381.79,
    },
    Rates {
        target: "Cortex-M4F (FPU)",
        core: Core::M4,
        weights: Weights::F32,
        feed: Feed::F32,
        per_mac: 1.28,
        per_mac_int4: 1.28,
        per_mac_int16_input: 1.28,
        per_row: 51.25,
        per_partial_row: 31.48,
        per_input: -3.45,
        per_layer: 165.67,
        per_feature: 39.16,
        per_class: 101.14,
        fixed: 340.9,
    },
    Rates {
        target: "Cortex-M0",
        core: Core::M0,
        weights: Weights::Int8,
        feed: Feed::F32,
        per_mac: 3.5,
        per_mac_int4: 4.11,
        per_mac_int16_input: 5.97,
        per_row: 158.28,
        per_partial_row: 33.02,
        per_input: 13.92,
        per_layer: 431.62,
        per_feature: 783.2,
        per_class: 2750.47,
        fixed: 856.41,
    },
    Rates {
        target: "Cortex-M0",
        core: Core::M0,
        weights: Weights::Int8,
        feed: Feed::Integer,
        per_mac: 3.5,
        per_mac_int4: 4.11,
        per_mac_int16_input: 5.97,
        per_row: 158.28,
        per_partial_row: 33.02,
        per_input: 13.92,
        per_layer: 431.62,
        per_feature: 147.51,
        per_class: 2756.19,
        fixed: 949.38,
    },
];
// kb-harness:end rates

/// One estimate: a target and input path, and the instructions of one inference.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct Estimate {
    /// Target.
    pub target: String,
    /// Its core class.
    pub core: Core,
    /// Input path.
    pub feed: Feed,
    /// Estimated instructions per inference (an instruction count, not cycles).
    pub instructions: u64,
    /// The time range at the clock asked for, if one was.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub latency: Option<Latency>,
}

/// A latency range from an instruction count, a clock, and a [`CPI`] assumption.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct Latency {
    /// The clock, MHz.
    pub clock_mhz: f64,
    /// Microseconds at the low CPI.
    pub low_us: f64,
    /// Microseconds at the high CPI.
    pub high_us: f64,
    /// The assumption, as stated in [`CPI`].
    pub assumption: &'static str,
}

/// A dense layer as the estimate sees it.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Layer {
    /// Input width.
    pub inputs: usize,
    /// Output width.
    pub outputs: usize,
    /// Whether its weights are int4 (`Nibble4x4`), which cost [`Rates::per_mac_int4`].
    pub int4: bool,
    /// Whether it reads an int16 input tensor (the first layer of a format-version-7 blob),
    /// which costs [`Rates::per_mac_int16_input`].
    pub int16_input: bool,
}

impl Layer {
    /// A layer of int8 (or f32) weights.
    pub fn new(inputs: usize, outputs: usize) -> Self {
        Self {
            inputs,
            outputs,
            int4: false,
            int16_input: false,
        }
    }
}

/// `v` rounded up to a multiple of 4 (the `Blocked4x4` padding).
fn pad4(v: usize) -> f64 {
    v.div_ceil(4) as f64 * 4.0
}

/// Instructions one inference takes with `rates`, for a model with `features` raw inputs and
/// `layers` in order.
pub fn instructions(r: &Rates, features: usize, layers: &[Layer]) -> f64 {
    let classes = layers.last().map_or(0, |l| l.outputs);
    let dense: f64 = layers
        .iter()
        .map(|l| {
            let (i, o) = (l.inputs, l.outputs);
            let partial = if i % 4 == 0 { 0.0 } else { pad4(o) };
            let per_mac = if l.int4 {
                r.per_mac_int4
            } else if l.int16_input {
                r.per_mac_int16_input
            } else {
                r.per_mac
            };
            per_mac * pad4(i) * pad4(o)
                + r.per_row * pad4(o)
                + r.per_partial_row * partial
                + r.per_input * pad4(i)
                + r.per_layer
        })
        .sum();
    dense + r.per_feature * features as f64 + r.per_class * classes as f64 + r.fixed
}

/// The time range of `instructions` at `clock_mhz` on `core`.
pub fn latency(core: Core, instructions: u64, clock_mhz: f64) -> Option<Latency> {
    let &(_, low, high, assumption) = CPI.iter().find(|c| c.0 == core)?;
    let us = instructions as f64 / clock_mhz;
    Some(Latency {
        clock_mhz,
        low_us: us * low,
        high_us: us * high,
        assumption,
    })
}

/// Every estimate `rates` hold for models of `weights` with `features` inputs and `layers`,
/// with a latency range when `clock_mhz` is given.
pub fn estimate(
    rates: &[Rates],
    weights: Weights,
    features: usize,
    layers: &[Layer],
    clock_mhz: Option<f64>,
) -> Vec<Estimate> {
    rates
        .iter()
        .filter(|r| r.weights == weights)
        .map(|r| {
            let n = instructions(r, features, layers).round().max(0.0) as u64;
            Estimate {
                target: r.target.into(),
                core: r.core,
                feed: r.feed,
                instructions: n,
                latency: clock_mhz.and_then(|f| latency(r.core, n, f)),
            }
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn rates() -> Rates {
        Rates {
            target: "t",
            core: Core::M4,
            weights: Weights::Int8,
            feed: Feed::F32,
            per_mac: 2.0,
            per_mac_int4: 3.0,
            per_mac_int16_input: 4.0,
            per_row: 10.0,
            per_partial_row: 6.0,
            per_input: 1.0,
            per_layer: 7.0,
            per_feature: 3.0,
            per_class: 4.0,
            fixed: 5.0,
        }
    }

    #[test]
    fn estimate_adds_the_rates_on_padded_widths() {
        // 3→5→2, padded 4→8 and 8→4: MACs 32 + 32 (128), rows 8 + 4 (120), partial groups
        // in both layers (3 and 5 inputs: 12 rows, 72), padded inputs 4 + 8 (12), 2 layers
        // (14); 3 features (9), 2 classes (8), fixed 5.
        let e = estimate(
            &[rates()],
            Weights::Int8,
            3,
            &[Layer::new(3, 5), Layer::new(5, 2)],
            None,
        );
        assert_eq!(e.len(), 1);
        assert_eq!(e[0].instructions, 128 + 120 + 72 + 12 + 14 + 9 + 8 + 5);
        // 8 inputs: no partial group. MACs 32 (64), rows 4 (40), inputs 8, layer 7; 8
        // features (24), 4 classes (16), fixed 5.
        let whole =
            estimate(&[rates()], Weights::Int8, 8, &[Layer::new(8, 4)], None)[0].instructions;
        assert_eq!(whole, 64 + 40 + 8 + 7 + 24 + 16 + 5);
        // The same layer with int4 weights: its 32 MACs at 3 instead of 2 (96).
        let int4 = Layer {
            int4: true,
            ..Layer::new(8, 4)
        };
        let w4 = estimate(&[rates()], Weights::Int8, 8, &[int4], None)[0].instructions;
        assert_eq!(w4, 96 + 40 + 8 + 7 + 24 + 16 + 5);
        assert_eq!(e[0].latency, None);
        assert!(estimate(&[rates()], Weights::F32, 3, &[Layer::new(3, 5)], None).is_empty());
    }

    #[test]
    fn latency_is_the_count_over_the_clock_times_the_stated_cpi() {
        // 64,000 instructions at 64 MHz: 1000 µs at CPI 1, 2000 µs at CPI 2 (the M4 range).
        let l = latency(Core::M4, 64_000, 64.0).unwrap();
        assert!((l.low_us - 1000.0).abs() < 1e-9 && (l.high_us - 2000.0).abs() < 1e-9);
        assert!(l.assumption.contains("from memory"));
        let l0 = latency(Core::M0, 16_000, 16.0).unwrap();
        assert!((l0.high_us - 2500.0).abs() < 1e-9);
    }

    #[test]
    fn shipped_rates_cover_both_targets_and_both_paths() {
        for (core, weights, feed) in [
            (Core::M4, Weights::Int8, Feed::F32),
            (Core::M4, Weights::Int8, Feed::Integer),
            (Core::M0, Weights::Int8, Feed::F32),
            (Core::M0, Weights::Int8, Feed::Integer),
            (Core::M4, Weights::F32, Feed::F32),
        ] {
            assert!(
                RATES
                    .iter()
                    .any(|r| (r.core, r.weights, r.feed) == (core, weights, feed)),
                "{core:?} {weights:?} {feed:?}"
            );
        }
    }
}
