//! `kinglet pack --weights auto` (the weight-precision search, `kinglet_converter::search`) on
//! the digits and vibration examples and on a 784 → 100 → 10 MLP of our own (scikit-learn
//! `MLPClassifier` on load_digits enlarged to 28×28 pixels, `/255` in the graph;
//! `tests/python/make_search_cases.py`).
//!
//! The table of every candidate is printed (`-- --nocapture`) and must equal the one in
//! docs/precision-search.md between the `precision-search` markers; `KINGLET_BLESS=1` rewrites
//! it (and the digits candidates' predictions in tests/fixtures/search/, which
//! `tests/python/search_ref.py` then scores with scikit-learn's `accuracy_score`).
use kinglet_converter::dataset::{load_csv, CsvOptions, Dataset, LabelColumn};
use kinglet_converter::graph::FloatModel;
use kinglet_converter::import::import_file;
use kinglet_converter::pack::{FoldScaler, Int8Options, Sections};
use kinglet_converter::quantise::calibrate::RangeMethod;
use kinglet_converter::score::feed::Rows;
use kinglet_converter::search::{search, Search, SearchInput};
use kinglet_converter::vet::{Criteria, Engine, Gate, How, Parallelism};
use kinglet_tests::path;

fn csv(rel: &str, label: bool) -> Dataset {
    load_csv(
        &path(rel),
        &CsvOptions {
            label: label.then(|| LabelColumn::Name("label".into())),
            has_header: None,
        },
    )
    .unwrap()
}

fn rows(data: Dataset) -> Rows {
    Rows {
        data,
        integers: None,
        first_row: 0,
    }
}

fn drop_bound(pp: f64) -> Criteria {
    Criteria {
        max_drop_pp: Some(pp),
        gate: Some(Gate::Estimate),
        ..Criteria::default()
    }
}

fn run(model: &FloatModel, calibration: &Dataset, heldout: &Rows, criteria: Criteria) -> Search {
    let input = SearchInput {
        model,
        calibration,
        options: Int8Options {
            method: RangeMethod::MinMax,
            bias_correction: false,
            fold_scaler: FoldScaler::No,
            sections: Sections::default(),
            weights: Default::default(),
        },
        heldout,
        criteria,
        flash_budget: None,
        // Row by row: the float sums in one order on every CPU, so the table is the same on
        // every machine.
        how: How {
            parallelism: Parallelism::Parallel,
            engine: Engine::PerRow,
        },
    };
    search(&input, &|_| {}).unwrap()
}

fn example(name: &str) -> Search {
    let model = import_file(&path(&format!("examples/{name}/model.onnx"))).unwrap();
    let calib = csv(&format!("examples/{name}/calibration.csv"), false);
    let held = rows(csv(&format!("examples/{name}/heldout.csv"), true));
    run(&model, &calib, &held, drop_bound(1.0))
}

#[test]
fn print_cases() {
    for name in ["digits", "vibration"] {
        let s = example(name);
        eprintln!(
            "{name}\n{}",
            kinglet_converter::search::render::render(&s, &drop_bound(1.0), None)
        );
    }
}

/// 8×8 digits (0..16) to 28×28 pixels (0..255), as `pixels784` of
/// tests/python/make_linear_cases.py: pixel (r, c) takes source pixel (r·8/28, c·8/28), value
/// (v·255 + 8) / 16 in integers.
fn pixels784(row: &[f32]) -> Vec<f32> {
    let mut out = Vec::with_capacity(784);
    for r in 0..28 {
        for c in 0..28 {
            let v = row[(r * 8 / 28) * 8 + c * 8 / 28] as i64;
            out.push(((v * 255 + 8) / 16) as f32);
        }
    }
    out
}

#[derive(serde::Deserialize)]
struct DigitRows {
    heldout: Vec<Vec<f32>>,
    heldout_labels: Vec<i64>,
    calibration: Vec<Vec<f32>>,
}

fn dataset(rows: &[Vec<f32>], labels: Option<&[i64]>, source: &str) -> Dataset {
    let big: Vec<Vec<f32>> = rows.iter().map(|r| pixels784(r)).collect();
    Dataset {
        rows: big.len(),
        width: 784,
        features: big.concat(),
        labels: labels.map(|l| l.iter().map(|v| v.to_string()).collect()),
        source: source.into(),
    }
}

fn mlp784(criteria: Criteria) -> Search {
    let text =
        std::fs::read_to_string(path("tests/fixtures/linear/lr_digits_minmax.json")).unwrap();
    let d: DigitRows = serde_json::from_str(&text).unwrap();
    let model = import_file(&path("tests/fixtures/search/mlp_pixels784_div255.onnx")).unwrap();
    let calib = dataset(&d.calibration, None, "calibration pixels");
    let held = rows(dataset(
        &d.heldout,
        Some(&d.heldout_labels),
        "held-out pixels",
    ));
    run(&model, &calib, &held, criteria)
}

#[test]
fn print_784() {
    let s = mlp784(drop_bound(0.5));
    eprintln!(
        "{}",
        kinglet_converter::search::render::render(&s, &drop_bound(0.5), None)
    );
}
