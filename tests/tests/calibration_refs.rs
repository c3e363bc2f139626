//! Calibration against numpy: `tests/fixtures/calib/calib_cases.json`, written by
//! `tests/python/calib_ref.py` (numpy 2.4.6; regenerate and compare with
//! `bash tests/python/run_all.sh`).
use kinglet_converter::dataset::Dataset;
use kinglet_converter::graph::{Activation, DenseLayer, FloatModel};
use kinglet_converter::pack::{pack_f32, pack_int8_with, FoldScaler, Int8Options, Sections};
use kinglet_converter::quantise::bias_correction::bias_corrected;
use kinglet_converter::quantise::calibrate::{calibrate, RangeMethod};
use kinglet_converter::quantise::least_error::{least_error, GRID_STEPS};
use kinglet_converter::quantise::params::activation_quant;
use kinglet_converter::quantise::percentile::percentile;
use kinglet_converter::vet::fidelity::{int8_bounds, Energy};
use kinglet_runtime::unstable::scale::quantize_linear;
use kinglet_runtime::unstable::wire::format::OutputKind;
use kinglet_runtime::Model;
use serde_json::Value;

fn cases() -> Value {
    let text =
        std::fs::read_to_string(kinglet_tests::path("tests/fixtures/calib/calib_cases.json"))
            .unwrap();
    serde_json::from_str(&text).unwrap()
}

fn f32s(v: &Value) -> Vec<f32> {
    v.as_array()
        .unwrap()
        .iter()
        .map(|x| x.as_f64().unwrap() as f32)
        .collect()
}

#[test]
fn percentile_equals_numpy_linear() {
    // numpy.percentile(values, p), default method "linear" (Hyndman & Fan 1996, definition 7),
    // on float64 copies of float32 sets, rounded to f32 once: the same operations as ours.
    let doc = cases();
    let sets = doc["percentile"].as_array().unwrap();
    assert!(sets.len() >= 7);
    let mut checked = 0;
    for case in sets {
        let mut v = f32s(&doc["sets"][case["set"].as_str().unwrap()]);
        v.sort_by(f32::total_cmp);
        let ps = case["p"].as_array().unwrap();
        let expected = f32s(&case["expected"]);
        for (p, want) in ps.iter().zip(expected) {
            let p = p.as_f64().unwrap();
            let got = percentile(&v, p);
            assert_eq!(got, want, "{} p={p}", case["set"]);
            checked += 1;
        }
    }
    assert_eq!(checked, sets.len() * 9);
}

#[test]
fn least_error_grid_equals_numpy() {
    // numpy's grid search of tests/python/calib_ref.py: same candidates, same int8 rounding;
    // the chosen step and range exactly, the error up to summation order.
    let doc = cases();
    assert_eq!(doc["grid"].as_u64(), Some(GRID_STEPS as u64));
    let sets = doc["mse"].as_array().unwrap();
    assert!(sets.len() >= 6);
    let mut clipped = 0;
    for case in sets {
        let name = &case["set"];
        let v = f32s(&doc["sets"][name.as_str().unwrap()]);
        let e = least_error(&v);
        assert_eq!(e.step as u64, case["step"].as_u64().unwrap(), "{name}");
        assert_eq!(e.range.min, case["min"].as_f64().unwrap() as f32, "{name}");
        assert_eq!(e.range.max, case["max"].as_f64().unwrap() as f32, "{name}");
        for (got, key) in [(e.mse, "mse"), (e.mse_minmax, "mse_minmax")] {
            let want = case[key].as_f64().unwrap();
            assert!(
                (got - want).abs() <= 1e-9 * want,
                "{name} {key}: {got} vs {want}"
            );
        }
        clipped += usize::from(e.step < GRID_STEPS);
    }
    // The fixture has sets where clipping pays (normal, Student t) and where it does not.
    assert!(clipped >= 2 && clipped < sets.len(), "{clipped}");
}

#[test]
fn bias_correction_equals_numpy() {
    // Nagel et al. (2019) §4.2 on the calibration rows, as tests/python/calib_ref.py computes
    // it in numpy (float64 means of the float32 forward pass).
    let doc = cases();
    let case = &doc["bias"];
    let layers: Vec<DenseLayer> = case["layers"]
        .as_array()
        .unwrap()
        .iter()
        .map(|l| {
            let rows: Vec<Vec<f32>> = l["weights"].as_array().unwrap().iter().map(f32s).collect();
            DenseLayer {
                inputs: rows[0].len(),
                outputs: rows.len(),
                weights: rows.concat(),
                bias: f32s(&l["bias"]),
                activation: match l["activation"].as_str().unwrap() {
                    "relu" => Activation::Relu,
                    _ => Activation::Linear,
                },
            }
        })
        .collect();
    let model = FloatModel {
        input_len: layers[0].inputs,
        scaler: None,
        layers,
        output: OutputKind::Softmax,
        labels: vec![],
    };
    let rows: Vec<Vec<f32>> = case["rows"].as_array().unwrap().iter().map(f32s).collect();
    let data = Dataset {
        rows: rows.len(),
        width: model.input_len,
        features: rows.concat(),
        labels: None,
        source: "calib_cases.json".into(),
    };
    let blob = pack_f32(&model).unwrap();
    let cal = calibrate(&Model::parse(&blob).unwrap(), &data, RangeMethod::MinMax).unwrap();
    let got = bias_corrected(&model, &cal.means).unwrap();
    let want = case["corrected_bias"].as_array().unwrap();
    let mut moved = 0;
    for (k, (l, w)) in got.layers.iter().zip(want).enumerate() {
        let w = f32s(w);
        for (o, (&g, &w)) in l.bias.iter().zip(&w).enumerate() {
            assert!((g - w).abs() <= 1e-6, "layer {k} output {o}: {g} vs {w}");
            moved += usize::from((g - model.layers[k].bias[o]).abs() > 1e-4);
        }
    }
    // The correction is not a no-op on this model.
    assert!(moved >= 4, "{moved}");
    // Packing with it gives a valid blob.
    let opts = Int8Options {
        method: RangeMethod::MinMax,
        bias_correction: true,
        fold_scaler: FoldScaler::No,
        sections: Sections::ALL,
        weights: Default::default(),
        ..RangeMethod::MinMax.into()
    };
    let p = pack_int8_with(&model, &data, opts).unwrap();
    assert!(p.bias_correction && Model::parse(&p.blob).is_ok());
}

#[test]
fn noise_split_equals_numpy() {
    // vet's split of the squared error into values beyond the int8 range (clipping) and
    // within it (rounding), against numpy (tests/python/calib_ref.py, `noise`).
    let doc = cases();
    let case = &doc["noise"];
    let v = f32s(&case["values"]);
    let (min, max) = (
        case["min"].as_f64().unwrap() as f32,
        case["max"].as_f64().unwrap() as f32,
    );
    let q = activation_quant(min, max);
    let bounds = int8_bounds(q.scale, q.zero_point);
    let mut e = Energy::default();
    for &x in &v {
        let back = (f32::from(quantize_linear(x, q.scale, q.zero_point)) - f32::from(q.zero_point))
            * q.scale;
        e.add(x, back, bounds);
    }
    assert_eq!(e.clipped, case["clipped"].as_u64().unwrap());
    assert!(e.clipped > 0);
    for (got, key) in [
        (e.clip_noise, "clip_noise"),
        (e.round_noise, "round_noise"),
        (e.noise, "noise"),
        (e.signal, "signal"),
    ] {
        let want = case[key].as_f64().unwrap();
        assert!((got - want).abs() <= 1e-9 * want, "{key}: {got} vs {want}");
    }
    assert!((e.clip_noise + e.round_noise - e.noise).abs() <= 1e-12 * e.noise);
}
