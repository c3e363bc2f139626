//! The batched host forward passes (`kinglet_converter::host`, `vet`'s default) against the
//! runtime's own per-row path (`Model::infer_traced`, `Model::classify`; `vet --per-row`), on
//! random models and rows (proptest) for every input feed (f32, i16, u8) and entry point, and
//! on the bundled examples.
//!
//! int8: every traced tensor, every score and both entry points' classes are equal bit for bit.
//! f32: the dot products sum in another order (see `host::float`), so values are compared with
//! a tolerance of `1e-4 · (1 + |v|)` plus the rounding bound of the sums that made them
//! ([`rounding_bounds`]: where a sum cancels, `|v|` is small but its rounding is not), and
//! classes wherever the runtime's top two scores are further apart than that.
use kinglet_converter::dataset::{load_file, Dataset, IntegerValues, LabelColumn, LoadOptions};
use kinglet_converter::graph::{
    Activation, DenseLayer, FloatModel, OutputKind, Scaler, ScalerKind,
};
use kinglet_converter::host::{FloatBatch, FloatHost, Int8Host};
use kinglet_converter::import::import_file;
use kinglet_converter::pack::{
    pack_f32, pack_int8_sections, pack_int8_with, FoldScaler, Int8Options, Sections,
};
use kinglet_converter::quantise::calibrate::RangeMethod;
use kinglet_converter::score::feed::{input_at, Entry};
use kinglet_converter::vet::run::{evaluate, RowOutcome};
use kinglet_converter::vet::{Engine, Fed, ModelPair, Parallelism};
use kinglet_runtime::{Input, Model, Stage};
use proptest::prelude::*;
use std::path::Path;

/// `a` and `b` within `1e-4 · (1 + |v|)` and `extra` more: the rounding bound of the value's
/// sums.
fn close_within(a: f32, b: f32, extra: f64) -> bool {
    f64::from((a - b).abs()) <= 1e-4 * (1.0 + f64::from(a.abs().max(b.abs()))) + extra
}

/// How far two f32 evaluations of `model` that sum each dot product in a different order
/// may differ, per traced tensor of one row (`scaled` its scaled input) and for the scores.
/// Recursive summation of `n` products is within `γ_n · Σ|w x|` (Higham, "Accuracy and
/// Stability of Numerical Algorithms", 2nd ed., 2002, §3.1 and §4.2, from memory), so two
/// orders differ by at most `2γ_n · Σ|w x|`; an error in a layer's input reaches its outputs
/// through `|W|` at most (ReLU and the pointwise activations move values no faster than their
/// argument, taken as 1.25 for the steepest), so the bound of tensor `k` is
/// `c_k · M_k`, `M_k = |W_k| M_{k−1} + |b_k|` over the absolute values (in f64), with `c_k` the
/// sum of each layer's `2γ_{n+2}` (two roundings more where the input scale is folded into
/// the weights; `host::float`) times 1.25 per activation. Softmax and sigmoid scores move by at
/// most half the largest change of their logits; the bound of the last tensor is used.
fn rounding_bounds(m: &Model<'_>, scaled: &[f32]) -> (Vec<Vec<f64>>, f64) {
    let u = f64::from(f32::EPSILON) / 2.0;
    let mut mag: Vec<f64> = scaled.iter().map(|v| f64::from(v.abs())).collect();
    let mut out = vec![vec![0.0; mag.len()]];
    let mut c = 0.0f64;
    for l in m.layers() {
        let fl = kinglet_converter::host::layers::FloatLayer::new(l.desc);
        let n = (fl.inputs + 2) as f64;
        c = (c + 2.0 * n * u / (1.0 - n * u)) * 1.25;
        mag = (0..fl.outputs)
            .map(|o| {
                let row = &fl.weights[o * fl.inputs..(o + 1) * fl.inputs];
                let dot: f64 = row
                    .iter()
                    .zip(&mag)
                    .map(|(w, x)| f64::from(w.abs()) * x)
                    .sum();
                dot + f64::from(fl.bias[o].abs())
            })
            .collect();
        out.push(mag.iter().map(|v| c * v).collect());
    }
    let scores = out
        .last()
        .map_or(0.0, |b| b.iter().copied().fold(0.0, f64::max));
    (out, scores)
}

/// One row through the runtime: every traced tensor (its int8 values, its real values), the
/// scores and the class.
type Traced = (Vec<Vec<i8>>, Vec<Vec<f32>>, Vec<f32>, usize);

/// One row of `m` through `Model::infer_traced`.
fn traced(m: &Model<'_>, input: Input<'_>) -> Traced {
    let mut scratch = vec![0u8; m.scratch_bytes()];
    let mut scores = vec![0f32; m.output_len()];
    let (mut q, mut r) = (Vec::new(), Vec::new());
    let p = m
        .infer_traced(input, &mut scratch, &mut scores, &mut |s: &Stage<'_>| {
            q.push(
                (0..s.values.len())
                    .filter_map(|i| s.values.int8(i))
                    .collect(),
            );
            r.push(
                (0..s.values.len())
                    .filter_map(|i| s.values.real(i))
                    .collect(),
            );
        })
        .unwrap();
    (q, r, scores, p.class)
}

/// The batched passes equal the runtime's per row: int8 bit for bit, f32 within tolerance.
fn check_hosts(pair: &ModelPair<'_>, data: &Dataset, integers: Option<&IntegerValues>) {
    check_hosts_on(pair, data, integers, true);
}

/// [`check_hosts`], the f32 side only if `float`.
fn check_hosts_on(
    pair: &ModelPair<'_>,
    data: &Dataset,
    integers: Option<&IntegerValues>,
    float: bool,
) {
    let q = Int8Host::new(&pair.int8).unwrap();
    let f = FloatHost::new(&pair.float).unwrap();
    let qb = q.run(data.rows, |r| input_at(data, integers, r)).unwrap();
    // The portable products (what a host without AVX-512 VNNI runs) give the same batch; on
    // such a host both are the portable path.
    let portable = Int8Host::portable(&pair.int8).unwrap();
    let pb = portable
        .run(data.rows, |r| input_at(data, integers, r))
        .unwrap();
    assert_eq!(pb, qb, "portable and default int8 products differ");
    let fb = if float {
        let fb = f.run(&data.features, data.rows).unwrap();
        // The lean pass (what `vet` runs) gives the same batch, its input stage row by row.
        let lean = f.run_lean(&data.features, data.rows).unwrap();
        assert_eq!(
            (&lean.stages[1..], &lean.scores, &lean.class),
            (&fb.stages[1..], &fb.scores, &fb.class)
        );
        let mut row = Vec::new();
        for r in 0..data.rows {
            f.scaled_row(data.row(r), &mut row);
            assert_eq!(row, fb.stages[0].row(r), "scaled row {r}");
            if !lean.stages[0].values.is_empty() {
                assert_eq!(lean.stages[0].row(r), fb.stages[0].row(r), "lean row {r}");
            }
        }
        fb
    } else {
        FloatBatch {
            rows: 0,
            stages: Vec::new(),
            scores: Vec::new(),
            class: Vec::new(),
        }
    };
    let out = pair.int8.output_len();
    let mut scratch = vec![0u8; pair.int8.scratch_bytes()];
    for r in 0..data.rows {
        let input = input_at(data, integers, r);
        let (bytes, _, scores, class) = traced(&pair.int8, input);
        for (k, stage) in bytes.iter().enumerate() {
            assert_eq!(&qb.stages[k].row(r), stage, "int8 row {r} stage {k}");
        }
        let got = &qb.scores[r * out..(r + 1) * out];
        assert_eq!(
            got.iter().map(|v| v.to_bits()).collect::<Vec<_>>(),
            scores.iter().map(|v| v.to_bits()).collect::<Vec<_>>(),
            "int8 scores, row {r}"
        );
        assert_eq!(qb.infer_class[r], class, "int8 infer class, row {r}");
        let classified = pair.int8.classify(input, &mut scratch).unwrap();
        assert_eq!(qb.classify_class[r], classified, "int8 classify, row {r}");
        if !float {
            continue;
        }

        let (_, reals, fscores, fclass) = traced(&pair.float, Input::F32(data.row(r)));
        let (bounds, score_bound) = rounding_bounds(&pair.float, &reals[0]);
        for (k, stage) in reals.iter().enumerate() {
            let bound = bounds.get(k).map_or(&[][..], |b| &b[..]);
            for (i, (a, b)) in fb.stages[k].row(r).iter().zip(stage).enumerate() {
                let extra = bound.get(i).copied().unwrap_or(score_bound);
                assert!(
                    close_within(*a, *b, extra),
                    "f32 row {r} stage {k}: {a} vs {b} (bound {extra:e})"
                );
            }
        }
        let got = &fb.scores[r * out..(r + 1) * out];
        for (a, b) in got.iter().zip(&fscores) {
            assert!(
                close_within(*a, *b, score_bound),
                "f32 scores row {r}: {a} vs {b} (bound {score_bound:e})"
            );
        }
        let mut sorted = fscores.clone();
        sorted.sort_by(|a, b| b.total_cmp(a));
        let margin = if out == 1 {
            (fscores[0] - 0.5).abs()
        } else {
            sorted[0] - sorted[1]
        };
        if f64::from(margin) > 1e-3 + 2.0 * score_bound {
            assert_eq!(fb.class[r], fclass, "f32 class, row {r}");
        }
    }
}

/// `vet`'s two engines give the same per-row outcomes: int8 fields equal, f32 ones close.
fn check_engines(pair: &ModelPair<'_>, fed: &Fed<'_>) {
    let run = |e| evaluate(pair, fed, Parallelism::Serial, e, &|_| {}).unwrap();
    let (a, b): (Vec<RowOutcome>, Vec<RowOutcome>) = (run(Engine::PerRow), run(Engine::Batched));
    assert_eq!(a.len(), b.len());
    for (r, (a, b)) in a.iter().zip(&b).enumerate() {
        assert_eq!(a.int8_class, b.int8_class, "row {r}");
        assert_eq!(a.int8_infer_class, b.int8_infer_class, "row {r}");
        assert_eq!(a.int8_classify_class, b.int8_classify_class, "row {r}");
        assert_eq!(a.int8_scores, b.int8_scores, "row {r}");
        let (_, reals, _, _) = traced(&pair.float, Input::F32(fed.data.row(r)));
        let (bounds, score_bound) = rounding_bounds(&pair.float, &reals[0]);
        for (x, y) in a.float_scores.iter().zip(&b.float_scores) {
            assert!(close_within(*x, *y, score_bound), "row {r}: {x} vs {y}");
        }
        for (k, (x, y)) in a.energy.iter().zip(&b.energy).enumerate() {
            // A sum of squares of n values each within `e` moves by at most
            // `2 √(n · sum) · e + n e²` (Cauchy–Schwarz).
            let (n, e) = bounds.get(k).map_or((0.0, 0.0), |b| {
                (b.len() as f64, b.iter().copied().fold(0.0, f64::max))
            });
            let tol = |u: f64, v: f64| {
                let moved = 2.0 * (n * u.abs().max(v.abs())).sqrt() * e + n * e * e;
                (u - v).abs() <= 1e-3 * (1.0 + u.abs().max(v.abs())) + moved
            };
            assert!(
                tol(x.signal, y.signal) && tol(x.noise, y.noise),
                "row {r}: {x:?} {y:?}"
            );
            // The same int8 ranges on both paths; a float value right at a range's end may
            // fall on either side after the float paths' last-bit differences.
            assert!(x.clipped.abs_diff(y.clipped) <= 1, "row {r}: {x:?} {y:?}");
            assert!(
                (x.clip_noise + x.round_noise - x.noise).abs() <= 1e-9 * (1.0 + x.noise),
                "row {r}: {x:?}"
            );
        }
    }
}

fn model_strategy() -> impl Strategy<Value = (FloatModel, Vec<i16>, usize)> {
    (
        1usize..10,
        prop::collection::vec(1usize..9, 1..4),
        0u8..4,
        0u8..4,
    )
        .prop_flat_map(|(inputs, hidden, output, scaler)| {
            let mut widths = vec![inputs];
            widths.extend(&hidden);
            let out = if output == 1 { 1 } else { 2 + hidden.len() % 3 };
            *widths.last_mut().unwrap() = out;
            if widths.len() == 1 {
                widths.push(out);
            }
            let n_weights: usize = widths.windows(2).map(|w| w[0] * w[1] + w[1]).sum();
            let rows = 12usize;
            (
                Just((widths, output, scaler)),
                prop::collection::vec(-2.0f32..2.0, n_weights),
                prop::collection::vec(-300i16..300, rows * inputs),
                prop::collection::vec(0.01f32..2.0, inputs),
                Just(rows),
            )
        })
        .prop_map(|((widths, output, scaler), w, x, sc, rows)| {
            let mut it = w.into_iter();
            let layers: Vec<DenseLayer> = widths
                .windows(2)
                .enumerate()
                .map(|(k, p)| DenseLayer {
                    inputs: p[0],
                    outputs: p[1],
                    weights: (&mut it).take(p[0] * p[1]).collect(),
                    bias: (&mut it).take(p[1]).collect(),
                    activation: if k + 2 < widths.len() {
                        Activation::Relu
                    } else {
                        Activation::Linear
                    },
                })
                .collect();
            let n = widths[0];
            let scaler = match scaler {
                0 => None,
                1 => Some(Scaler {
                    kind: ScalerKind::Uniform,
                    offset: vec![3.0],
                    scale: vec![0.01],
                }),
                2 => Some(Scaler {
                    kind: ScalerKind::Affine,
                    offset: (0..n).map(|i| i as f32 * 7.0).collect(),
                    scale: sc.iter().map(|s| s * 0.01).collect(),
                }),
                // No offsets: the f32 pass folds the scales into the first layer.
                _ => Some(Scaler {
                    kind: ScalerKind::Affine,
                    offset: vec![0.0; n],
                    scale: sc.iter().map(|s| s * 0.01).collect(),
                }),
            };
            let model = FloatModel {
                input_len: n,
                scaler,
                layers,
                output: match output {
                    0 => OutputKind::Softmax,
                    1 => OutputKind::Sigmoid,
                    2 => OutputKind::OneVsRest,
                    _ => OutputKind::Logits,
                },
                labels: vec![],
            };
            (model, x, rows)
        })
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(48))]

    #[test]
    fn batched_equals_runtime_on_random_models((model, x, rows) in model_strategy()) {
        let n = model.input_len;
        let data = Dataset {
            rows,
            width: n,
            features: x.iter().map(|&v| f32::from(v)).collect(),
            labels: None,
            source: "random".into(),
        };
        let f = pack_f32(&model).unwrap();
        // Some random models are refused (a layer whose outputs never vary, say): skip those.
        let packed = pack_int8_sections(&model, &data, RangeMethod::MinMax, Sections::INTEGER_INPUT);
        prop_assume!(packed.is_ok());
        let q = packed.unwrap().blob;
        let pair = ModelPair::new(Model::parse(&f).unwrap(), Model::parse(&q).unwrap()).unwrap();
        let bytes: Vec<u8> = x.iter().map(|&v| v.unsigned_abs().min(255) as u8).collect();
        let as_u8 = Dataset {
            features: bytes.iter().map(|&v| f32::from(v)).collect(),
            ..data.clone()
        };
        let i16s = IntegerValues::I16(x.clone());
        let u8s = IntegerValues::U8(bytes);
        let feeds: [(&Dataset, Option<&IntegerValues>); 3] =
            [(&data, None), (&data, Some(&i16s)), (&as_u8, Some(&u8s))];
        for (d, ints) in feeds {
            check_hosts(&pair, d, ints);
            for entry in [Entry::Infer, Entry::Classify] {
                check_engines(&pair, &Fed { data: d, integers: ints, entry });
            }
        }
        // Rows far outside the calibration range: the input quantisation saturates at both
        // ends (quotients up to ±1e30), which the host computes in another form than the
        // runtime's `quantize_linear` (`host::input::quantise`).
        let far = Dataset {
            features: x
                .iter()
                .enumerate()
                .map(|(i, &v)| f32::from(v) * [1.0, 1e3, -1e6, 1e30][i % 4])
                .collect(),
            ..data.clone()
        };
        // The f32 side of such rows may overflow to infinities: only the int8 side is compared.
        check_hosts_on(&pair, &far, None, false);
    }
}

fn example(name: &str, data: &str) -> (Vec<u8>, Vec<u8>, Dataset) {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("../examples")
        .join(name);
    let model = import_file(&root.join("model.onnx")).unwrap();
    let opts = LoadOptions {
        label: Some(LabelColumn::Name("label".into())),
        ..LoadOptions::default()
    };
    let calib = load_file(&root.join("calibration.csv"), &LoadOptions::default()).unwrap();
    let rows = load_file(&root.join(data), &opts).unwrap();
    let f = pack_f32(&model).unwrap();
    let q = pack_int8_sections(&model, &calib, RangeMethod::MinMax, Sections::INTEGER_INPUT)
        .unwrap()
        .blob;
    (f, q, rows)
}

#[test]
fn batched_equals_runtime_on_the_examples() {
    for (name, data) in [("digits", "heldout.csv"), ("vibration", "heldout.csv")] {
        let (f, q, rows) = example(name, data);
        let pair = ModelPair::new(Model::parse(&f).unwrap(), Model::parse(&q).unwrap()).unwrap();
        check_hosts(&pair, &rows, None);
        for entry in [Entry::Infer, Entry::Classify] {
            check_engines(
                &pair,
                &Fed {
                    data: &rows,
                    integers: None,
                    entry,
                },
            );
        }
    }
}

/// Every number of two JSON reports within `1e-5` relative or `1e-6` absolute (scores are
/// probabilities, whose f32 spacing near 1 is 6e-8), everything else equal.
fn same_json(a: &serde_json::Value, b: &serde_json::Value, at: &str) {
    use serde_json::Value;
    match (a, b) {
        (Value::Number(x), Value::Number(y)) if x.is_f64() || y.is_f64() => {
            let (x, y) = (x.as_f64().unwrap(), y.as_f64().unwrap());
            assert!(
                (x - y).abs() <= 1e-5 * x.abs().max(y.abs()) + 1e-6,
                "{at}: {x} vs {y}"
            );
        }
        (Value::Array(x), Value::Array(y)) => {
            assert_eq!(x.len(), y.len(), "{at}");
            for (i, (x, y)) in x.iter().zip(y).enumerate() {
                same_json(x, y, &format!("{at}[{i}]"));
            }
        }
        (Value::Object(x), Value::Object(y)) => {
            assert_eq!(
                x.keys().collect::<Vec<_>>(),
                y.keys().collect::<Vec<_>>(),
                "{at}"
            );
            for (k, v) in x {
                same_json(v, &y[k], &format!("{at}.{k}"));
            }
        }
        _ => assert_eq!(a, b, "{at}"),
    }
}

/// On the bundled examples the two engines' reports agree: the text report byte for byte, and
/// the JSON report in every class, count and rate, with the float-derived sums (score error,
/// SQNR energies) equal to about 7 significant digits (the f32 dot products' rounding).
#[test]
fn reports_on_the_examples_do_not_change() {
    use kinglet_converter::score::Rows;
    use kinglet_converter::vet::render_text::{render, TextOptions};
    use kinglet_converter::vet::{vet_rows, Criteria, How, Sources};
    for name in ["digits", "vibration"] {
        let (f, q, rows) = example(name, "heldout.csv");
        let pair = ModelPair::new(Model::parse(&f).unwrap(), Model::parse(&q).unwrap()).unwrap();
        let rows = Rows::floats(rows);
        let run = |engine| {
            let how = How {
                parallelism: Parallelism::Parallel,
                engine,
            };
            vet_rows(
                &pair,
                &rows,
                Entry::Infer,
                &Sources::default(),
                &Criteria::default(),
                how,
                &|_| {},
            )
            .unwrap()
        };
        let (a, b) = (run(Engine::PerRow), run(Engine::Batched));
        let o = TextOptions {
            colour: false,
            show_rows: 10,
        };
        assert_eq!(render(&a, &o), render(&b, &o), "{name}");
        assert_eq!(a.predictions.float, b.predictions.float, "{name}");
        assert_eq!(a.predictions.int8, b.predictions.int8, "{name}");
        same_json(
            &serde_json::to_value(&a).unwrap(),
            &serde_json::to_value(&b).unwrap(),
            name,
        );
    }
}

/// A row the float model cannot run (its output overflows to infinity) fails both engines with
/// the same message, naming the first such row.
#[test]
fn both_engines_name_the_same_failing_row() {
    let model = FloatModel {
        input_len: 2,
        scaler: None,
        layers: vec![DenseLayer {
            inputs: 2,
            outputs: 2,
            weights: vec![10.0, 0.0, 0.0, 1.0],
            bias: vec![0.0, 0.0],
            activation: Activation::Linear,
        }],
        output: OutputKind::Softmax,
        labels: vec![],
    };
    let calib = Dataset {
        rows: 2,
        width: 2,
        features: vec![-1.0, -1.0, 1.0, 1.0],
        labels: None,
        source: "calibration".into(),
    };
    let f = pack_f32(&model).unwrap();
    let q = pack_int8_sections(&model, &calib, RangeMethod::MinMax, Sections::INTEGER_INPUT)
        .unwrap()
        .blob;
    let pair = ModelPair::new(Model::parse(&f).unwrap(), Model::parse(&q).unwrap()).unwrap();
    let mut features = vec![0.5f32; 2 * 3000];
    features[2 * 2500] = 3e38;
    features[2 * 2900] = 3e38;
    let data = Dataset {
        rows: 3000,
        width: 2,
        features,
        labels: None,
        source: "rows.csv".into(),
    };
    let fed = Fed {
        data: &data,
        integers: None,
        entry: Entry::Infer,
    };
    let message = |e| {
        evaluate(&pair, &fed, Parallelism::Parallel, e, &|_| {})
            .unwrap_err()
            .to_string()
    };
    let batched = message(Engine::Batched);
    assert_eq!(batched, message(Engine::PerRow));
    assert!(
        batched
            .starts_with("rows.csv: data row 2501 (1-based, header not counted): the float model"),
        "{batched}"
    );
}

#[test]
fn both_engines_compare_a_folded_input_with_the_raw_row() {
    // digits with the scaler folded into layer 1 (`pack --fold-scaler` when it wins): the int8
    // input holds the raw pixels exactly, so both engines find no error in it (compared with the
    // raw row, not the float model's scaled input) and agree on everything else.
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("../examples/digits");
    let model = import_file(&root.join("model.onnx")).unwrap();
    let calib = load_file(&root.join("calibration.csv"), &LoadOptions::default()).unwrap();
    let opts = LoadOptions {
        label: Some(LabelColumn::Name("label".into())),
        ..LoadOptions::default()
    };
    let rows = load_file(&root.join("heldout.csv"), &opts).unwrap();
    let f = pack_f32(&model).unwrap();
    let p = pack_int8_with(
        &model,
        &calib,
        Int8Options {
            method: RangeMethod::MinMax,
            bias_correction: false,
            fold_scaler: FoldScaler::Always,
            sections: Sections::ALL,
            weights: Default::default(),
            ..RangeMethod::MinMax.into()
        },
    )
    .unwrap();
    assert_eq!(p.raw_input.as_ref().map(|c| c.kept), Some("folded"));
    let pair = ModelPair::new(Model::parse(&f).unwrap(), Model::parse(&p.blob).unwrap()).unwrap();
    assert!(pair.raw_int8_input());
    assert!(pair.stage_names()[0].0.starts_with("input (raw, quantised"));
    let fed = Fed {
        data: &rows,
        integers: None,
        entry: Entry::Infer,
    };
    check_engines(&pair, &fed);
    for e in [Engine::PerRow, Engine::Batched] {
        let out = evaluate(&pair, &fed, Parallelism::Serial, e, &|_| {}).unwrap();
        assert!(out
            .iter()
            .all(|o| o.energy[0].noise == 0.0 && o.energy[0].signal > 0.0));
    }
}
