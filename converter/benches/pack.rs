//! Packing speed: a 784 → 128 → 10 model (101,770 parameters) calibrated on 1,000 rows, packed
//! to int8, and the same model packed to f32. Prints a table; run with
//! `cargo bench -p kinglet-converter --bench pack`.
//!
//! The goal (issue: "well under a second") is checked by reading the table, not by a timed test.
use kinglet_converter::dataset::Dataset;
use kinglet_converter::graph::{
    Activation, DenseLayer, FloatModel, OutputKind, Scaler, ScalerKind,
};
use kinglet_converter::pack::{pack_f32, pack_int8};
use kinglet_converter::quantise::calibrate::RangeMethod;
use std::time::Instant;

/// A small deterministic generator (xorshift64*), so the bench needs no extra crate.
struct Rng(u64);
impl Rng {
    fn next(&mut self) -> f32 {
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        let v = self.0.wrapping_mul(0x2545_F491_4F6C_DD1D) >> 40;
        v as f32 / (1u64 << 24) as f32
    }
}

fn dense(rng: &mut Rng, inputs: usize, outputs: usize, activation: Activation) -> DenseLayer {
    let w = (0..inputs * outputs)
        .map(|_| (rng.next() - 0.5) * 0.1)
        .collect();
    let b = (0..outputs).map(|_| (rng.next() - 0.5) * 0.1).collect();
    DenseLayer {
        inputs,
        outputs,
        weights: w,
        bias: b,
        activation,
    }
}

fn main() {
    let mut rng = Rng(0x5EED);
    let model = FloatModel {
        input_len: 784,
        scaler: Some(Scaler {
            kind: ScalerKind::Uniform,
            offset: vec![0.0],
            scale: vec![1.0 / 255.0],
        }),
        layers: vec![
            dense(&mut rng, 784, 128, Activation::Relu),
            dense(&mut rng, 128, 10, Activation::Linear),
        ],
        output: OutputKind::Softmax,
        labels: vec![],
    };
    let params: usize = model
        .layers
        .iter()
        .map(|l| l.inputs * l.outputs + l.outputs)
        .sum();
    let rows = 1000;
    let data = Dataset {
        rows,
        width: 784,
        features: (0..rows * 784)
            .map(|_| (rng.next() * 255.0).round())
            .collect(),
        labels: None,
        source: "generated".into(),
    };
    let reps = 5;
    let time = |f: &dyn Fn() -> usize| {
        let mut t: Vec<f64> = (0..reps)
            .map(|_| {
                let start = Instant::now();
                std::hint::black_box(f());
                start.elapsed().as_secs_f64()
            })
            .collect();
        t.sort_by(f64::total_cmp);
        (t[reps / 2], t[0], t[reps - 1])
    };
    let int8 = time(&|| {
        pack_int8(&model, &data, RangeMethod::MinMax)
            .map(|p| p.blob.len())
            .unwrap_or(0)
    });
    let pct = time(&|| {
        pack_int8(&model, &data, RangeMethod::Percentile(99.99))
            .map(|p| p.blob.len())
            .unwrap_or(0)
    });
    let f32p = time(&|| pack_f32(&model).map(|b| b.len()).unwrap_or(0));
    println!("pack benchmark: {params} parameters, {rows} calibration rows, {reps} runs each (median, min, max)");
    println!(
        "{:<28} {:>10} {:>10} {:>10}",
        "case", "median s", "min s", "max s"
    );
    for (name, (med, min, max)) in [
        ("int8, min/max ranges", int8),
        ("int8, percentile 99.99", pct),
        ("f32", f32p),
    ] {
        println!("{name:<28} {med:>10.4} {min:>10.4} {max:>10.4}");
    }
}
