//! End to end with an int16 input tensor (`runtime/FORMAT.md` §3.6, format version 7) on the
//! bundled digits example: the scikit-learn MLP's ONNX export packed with `--input-tensor int16`,
//! its input stage and first layer checked against independent computations on the held-out rows
//! (`sklearn.datasets.load_digits` pixels, `examples/digits/`).
//!
//! References: the input quantisation is ONNX `QuantizeLinear` with an int16 output
//! (`tests/tests/reference_numerics.rs` checks `quantize_linear_i16` against the onnx package's
//! reference evaluator); the scaler is the one in `model.onnx` (scikit-learn's `StandardScaler`
//! exported by skl2onnx); the first layer's accumulators are recomputed here in i64 from the
//! blob's own integers, so the check is of the runtime's kernel, not of the converter.
use kinglet_converter::dataset::{load_csv, CsvOptions, Dataset, LabelColumn};
use kinglet_converter::import::import_file;
use kinglet_converter::pack::{pack_int8_with, Int8Options, Sections};
use kinglet_converter::quantise::calibrate::RangeMethod;
use kinglet_runtime::unstable::requant::requantise_reference;
use kinglet_runtime::unstable::scale::quantize_linear_i16;
use kinglet_runtime::unstable::wire::format::{InputWidth, WeightLayout};
use kinglet_runtime::unstable::wire::layout;
use kinglet_runtime::{Input, Model, Stage};
use kinglet_tests::path;

fn rows(rel: &str, label: bool) -> Dataset {
    load_csv(
        &path(rel),
        &CsvOptions {
            label: label.then(|| LabelColumn::Name("label".into())),
            has_header: None,
        },
    )
    .unwrap()
}

/// The digits model packed with an int16 input, the integer input path kept.
fn pack(headroom: f64) -> Vec<u8> {
    let model = import_file(&path("examples/digits/model.onnx")).unwrap();
    let calib = rows("examples/digits/calibration.csv", false);
    let opts = Int8Options {
        sections: Sections::INTEGER_INPUT,
        input: InputWidth::I16,
        headroom,
        ..RangeMethod::MinMax.into()
    };
    pack_int8_with(&model, &calib, opts).unwrap().blob
}

/// Stage 0 (the int16 input) and stage 1 (layer 1's int8 output) of one inference.
fn stages(m: &Model<'_>, input: Input<'_>) -> (Vec<i16>, Vec<i8>) {
    let mut scratch = vec![0u8; m.scratch_bytes()];
    let mut scores = vec![0f32; m.output_len()];
    let (mut first, mut second) = (Vec::new(), Vec::new());
    m.infer_traced(input, &mut scratch, &mut scores, &mut |s: &Stage<'_>| {
        let n = s.values.len();
        match s.index {
            0 => first = (0..n).map(|i| s.values.int16(i).unwrap()).collect(),
            1 => second = (0..n).map(|i| s.values.int8(i).unwrap()).collect(),
            _ => {}
        }
    })
    .unwrap();
    (first, second)
}

#[test]
fn input_stage_and_first_layer_on_the_held_out_rows() {
    let blob = pack(2.0);
    assert_eq!(u16::from_le_bytes([blob[4], blob[5]]), 7);
    let m = Model::parse(&blob).unwrap();
    let d = m.desc();
    let q = d.input_quant.unwrap();
    assert_eq!((q.width, q.zero_point), (InputWidth::I16, 0));
    // Tensor 0 takes 2 · 64 bytes, then 64 and 32 and 10 int8 values ping-pong.
    assert_eq!(m.scratch_bytes(), 128 + 64);
    let scaler = d.scaler.unwrap();
    let f32s = |b: &[u8]| -> Vec<f32> {
        b.chunks_exact(4)
            .map(|c| f32::from_le_bytes(c.try_into().unwrap()))
            .collect()
    };
    let (offset, scale) = (f32s(scaler.offset), f32s(scaler.scale));
    assert_eq!(offset.len(), 64);
    let l0 = d.layers[0];
    assert_eq!(l0.layout, WeightLayout::Blocked4x4);
    let lq = l0.quant.unwrap();
    let i32s = |b: &[u8]| -> Vec<i32> {
        b.chunks_exact(4)
            .map(|c| i32::from_le_bytes(c.try_into().unwrap()))
            .collect()
    };
    let (bias, mult) = (i32s(l0.bias), i32s(lq.multiplier));
    let (_, w) = layout::split(l0.weights, 64, 64, 1).unwrap();
    let data = rows("examples/digits/heldout.csv", true);
    let (mut int_differs, mut saturated) = (0usize, 0usize);
    for r in 0..data.rows {
        let x = data.row(r);
        let (q16, out1) = stages(&m, Input::F32(x));
        // The input stage: QuantizeLinear(int16, zero point 0) of the scaled pixel.
        let want: Vec<i16> = x
            .iter()
            .zip(offset.iter().zip(&scale))
            .map(|(&v, (&o, &s))| quantize_linear_i16((v - o) * s, q.scale))
            .collect();
        assert_eq!(q16, want, "row {r}");
        saturated += q16
            .iter()
            .filter(|&&v| v == i16::MAX || v == i16::MIN)
            .count();
        // Layer 1 from the blob's integers, in i64: bias + Σ w·q, then the reference
        // requantisation (Jacob et al., 2018) with the ReLU clamp at the zero point.
        for o in 0..64 {
            let acc: i64 = i64::from(bias[o])
                + (0..64)
                    .map(|i| {
                        let wq = layout::decode_i8(w[layout::index(o, i, 64)]);
                        i64::from(wq) * i64::from(q16[i])
                    })
                    .sum::<i64>();
            let acc = i32::try_from(acc).expect("the overflow bound holds");
            let zp = lq.output_zero_point;
            let want = requantise_reference(acc, mult[o], lq.shift[o] as i8, zp, zp, 127);
            assert_eq!(out1[o], want, "row {r}, output {o}");
        }
        // The integer path (raw u8 pixels, the blob's fixed-point tables) lands within one
        // int16 step of the float path (FORMAT.md §3).
        let px: Vec<u8> = x.iter().map(|&v| v as u8).collect();
        let (q16_int, _) = stages(&m, Input::U8(&px));
        for (a, b) in q16.iter().zip(&q16_int) {
            assert!(
                (i32::from(*a) - i32::from(*b)).abs() <= 1,
                "row {r}: {a} vs {b}"
            );
            int_differs += usize::from(a != b);
        }
    }
    // The range covers every pixel's scaled 0..16, so nothing saturates.
    assert_eq!(saturated, 0);
    eprintln!(
        "{} of {} int16 inputs differ by one step between the float and the integer path",
        int_differs,
        data.rows * 64
    );
}

/// With an int16 input the first layer's weights stay int8, so the blob is as large as the
/// int8-input blob; only the header's version and the input tag differ in meaning.
#[test]
fn an_int16_input_costs_no_flash() {
    let model = import_file(&path("examples/digits/model.onnx")).unwrap();
    let calib = rows("examples/digits/calibration.csv", false);
    let int8 = pack_int8_with(
        &model,
        &calib,
        Int8Options {
            sections: Sections::INTEGER_INPUT,
            ..RangeMethod::MinMax.into()
        },
    )
    .unwrap()
    .blob;
    assert_eq!(pack(1.0).len(), int8.len());
}
