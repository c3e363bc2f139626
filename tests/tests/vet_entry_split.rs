//! Rows where `Model::infer` and `Model::classify` give different classes, worked by hand:
//! `vet` counts them and takes the int8 class from the chosen entry point, and `score` writes
//! each entry point's class.
//!
//! The model: two inputs, one linear layer, logits `[0, 1e-9 · x0]`, softmax, calibrated on
//! x0 = ±1000: the input step is 2000 / 255 ≈ 7.8 and the output step 2e-6 / 255 ≈ 7.8e-9. For
//! x0 = 10 the input quantises to one step and the second output to one step above the first,
//! so `classify` (integer argmax) says class 1. But `infer` dequantises the outputs to logits
//! 7.8e-9 apart, and its float softmax computes `exp(0 − 7.8e-9)`, which rounds to exactly 1.0
//! in f32 (its spacing below 1 is 6e-8): both probabilities are 0.5 and the tie goes to the
//! lowest index, class 0. For x0 = -10 both say class 0; for x0 = 1000 the logits are 1e-6
//! apart, far enough for f32, and both say 1.
use kinglet_converter::dataset::{Dataset, IntegerValues};
use kinglet_converter::graph::{Activation, DenseLayer, FloatModel, OutputKind};
use kinglet_converter::pack::{pack_f32, pack_int8_sections, Sections};
use kinglet_converter::quantise::calibrate::RangeMethod;
use kinglet_converter::score::{self, Entry, Rows};
use kinglet_converter::vet::{self, Criteria, ModelPair, Parallelism, Sources};
use kinglet_runtime::Model;

fn model() -> FloatModel {
    FloatModel {
        input_len: 2,
        scaler: None,
        layers: vec![DenseLayer {
            inputs: 2,
            outputs: 2,
            weights: vec![0.0, 0.0, 1e-9, 0.0],
            bias: vec![0.0, 0.0],
            activation: Activation::Linear,
        }],
        output: OutputKind::Softmax,
        labels: vec!["low".into(), "high".into()],
    }
}

fn rows(x0: &[i16]) -> Rows {
    Rows {
        data: Dataset {
            rows: x0.len(),
            width: 2,
            features: x0.iter().flat_map(|&x| [f32::from(x), 0.0]).collect(),
            labels: Some(vec!["high".into(); x0.len()]),
            source: "hand-made".into(),
        },
        integers: Some(IntegerValues::I16(
            x0.iter().flat_map(|&x| [x, 0]).collect(),
        )),
        first_row: 0,
    }
}

#[test]
fn infer_and_classify_split_on_a_softmax_tie() {
    let m = model();
    let calib = Dataset {
        rows: 2,
        width: 2,
        features: vec![-1000.0, 0.0, 1000.0, 0.0],
        labels: None,
        source: "calibration".into(),
    };
    let f = pack_f32(&m).unwrap();
    let q = pack_int8_sections(&m, &calib, RangeMethod::MinMax, Sections::INTEGER_INPUT)
        .unwrap()
        .blob;
    let pair = ModelPair::new(Model::parse(&f).unwrap(), Model::parse(&q).unwrap()).unwrap();
    let data = rows(&[10, -10, 1000, 10, 10]);

    let scored = score::score(&pair.int8, "q", &data, Entry::Classify).unwrap();
    let infer: Vec<usize> = scored.rows.iter().map(|r| r.infer_class).collect();
    let classify: Vec<usize> = scored.rows.iter().map(|r| r.class).collect();
    assert_eq!(infer, [0, 0, 1, 0, 0]);
    assert_eq!(classify, [1, 0, 1, 1, 1]);
    // The tie is real: both probabilities are exactly 0.5.
    assert_eq!(scored.rows[0].scores, [0.5, 0.5]);

    let run = |entry| {
        vet::vet_rows(
            &pair,
            &data,
            entry,
            &Sources::default(),
            &Criteria::default(),
            Parallelism::Serial,
            &|_| {},
        )
        .unwrap()
    };
    for (entry, int8) in [(Entry::Infer, &infer), (Entry::Classify, &classify)] {
        let r = run(entry);
        assert_eq!(&r.predictions.int8, int8, "{entry:?}");
        // Rows 1, 4 and 5 (1-based) split, whichever entry point is measured.
        assert_eq!(r.entry_split.rows, 3);
        assert_eq!(r.entry_split.data_rows, [1, 4, 5]);
        assert_eq!(
            r.measured.int8_call,
            format!("{}(Input::I16)", entry.call_name())
        );
        // The float model's softmax ties the same way: class 0 on those rows.
        assert_eq!(r.predictions.float, [0, 0, 1, 0, 0]);
        let text = vet::render_text::render(
            &r,
            &vet::render_text::TextOptions {
                colour: false,
                show_rows: 2,
            },
        );
        assert!(
            text.contains("3 rows where the int8 blob's Model::infer and Model::classify give different classes (a tie after infer's float softmax): data rows 1, 4, …"),
            "{text}"
        );
    }
    // Through classify the int8 blob gets the "high" rows right that the float model misses.
    let acc = run(Entry::Classify).accuracy.unwrap();
    assert_eq!((acc.float.correct, acc.int8.correct), (1, 4));
}
