//! `kinglet vet` on the bundled digits example, checked against scikit-learn.
//!
//! References:
//! - `examples/digits/reference_metrics.json`: scikit-learn 1.9.1 on the held-out rows of
//!   `sklearn.datasets.load_digits` with the pipeline's own `predict` (written by
//!   `examples/digits/make_model.py`): `correct`, `confusion_matrix`, and
//!   `precision_recall_fscore_support(labels=range(10), zero_division=0)`.
//! - `tests/fixtures/vet/digits_sklearn.json`: the same scikit-learn functions applied by
//!   `tests/python/vet_ref.py` to the float AND the int8 predictions our vet makes (kept in
//!   `tests/fixtures/vet/digits_predictions.json`; this test checks they are still ours).
//! - `tests/fixtures/vet/stats_cases.json`: scipy's Wilson limits and exact binomial test
//!   (`tests/python/vet_ref.py`), for the interval and McNemar's test.
//!
//! Run with KINGLET_BLESS=1 to rewrite `digits_predictions.json` after a deliberate change to
//! the quantiser, then rerun `tests/python/vet_ref.py`.
use kinglet_converter::dataset::{load_csv, CsvOptions, Dataset, LabelColumn};
use kinglet_converter::import::import_file;
use kinglet_converter::pack::{pack_f32, pack_int8};
use kinglet_converter::quantise::calibrate::RangeMethod;
use kinglet_converter::vet::stats::{
    mcnemar_exact, newcombe_paired, phi, wilson, PairedCounts, Z_95,
};
use kinglet_converter::vet::{self, Criteria, Gate, ModelPair, Parallelism, Sources, VetReport};
use kinglet_runtime::Model;
use kinglet_tests::path;
use serde_json::Value;

fn heldout() -> Dataset {
    load_csv(
        &path("examples/digits/heldout.csv"),
        &CsvOptions {
            label: Some(LabelColumn::Name("label".into())),
            has_header: None,
        },
    )
    .unwrap()
}

fn blobs() -> (Vec<u8>, Vec<u8>) {
    let model = import_file(&path("examples/digits/model.onnx")).unwrap();
    let calib = load_csv(
        &path("examples/digits/calibration.csv"),
        &CsvOptions::default(),
    )
    .unwrap();
    (
        pack_f32(&model).unwrap(),
        pack_int8(&model, &calib, RangeMethod::MinMax).unwrap().blob,
    )
}

fn report(parallelism: Parallelism, criteria: &Criteria) -> VetReport {
    let (f, q) = blobs();
    let pair = ModelPair::new(Model::parse(&f).unwrap(), Model::parse(&q).unwrap()).unwrap();
    vet::vet(
        &pair,
        &heldout(),
        &Sources::default(),
        criteria,
        parallelism,
        &|_| {},
    )
    .unwrap()
}

fn json(rel: &str) -> Value {
    serde_json::from_str(&std::fs::read_to_string(path(rel)).unwrap()).unwrap()
}

fn u64s(v: &Value) -> Vec<u64> {
    v.as_array()
        .unwrap()
        .iter()
        .map(|x| x.as_u64().unwrap())
        .collect()
}

fn f64s(v: &Value) -> Vec<f64> {
    v.as_array()
        .unwrap()
        .iter()
        .map(|x| x.as_f64().unwrap())
        .collect()
}

fn matrix(v: &Value) -> Vec<Vec<u64>> {
    v.as_array().unwrap().iter().map(u64s).collect()
}

/// Checks one model's metrics in the report against a scikit-learn result object.
fn check_against_sklearn(r: &VetReport, float: bool, sk: &Value) {
    let acc = r.accuracy.as_ref().unwrap();
    let (m, confusion) = if float {
        (&acc.float, &r.confusion.as_ref().unwrap().float)
    } else {
        (&acc.int8, &r.confusion.as_ref().unwrap().int8)
    };
    let which = if float { "float" } else { "int8" };
    assert_eq!(
        m.correct,
        sk["correct"].as_u64().unwrap(),
        "{which} correct"
    );
    assert!(
        (m.accuracy - sk["accuracy"].as_f64().unwrap()).abs() < 1e-12,
        "{which} accuracy"
    );
    assert_eq!(
        confusion.counts,
        matrix(&sk["confusion_matrix"]),
        "{which} confusion"
    );
    let per = r.per_class.as_ref().unwrap();
    let (p, rc, s) = (
        f64s(&sk["precision"]),
        f64s(&sk["recall"]),
        u64s(&sk["support"]),
    );
    for (k, c) in per.iter().enumerate() {
        let ours = if float { c.float } else { c.int8 };
        assert!(
            (ours.precision - p[k]).abs() < 1e-9,
            "{which} precision of class {k}"
        );
        assert!(
            (ours.recall - rc[k]).abs() < 1e-9,
            "{which} recall of class {k}"
        );
        assert_eq!(c.support, s[k], "support of class {k}");
    }
}

#[test]
fn float_metrics_equal_scikit_learn_on_the_pipeline_predictions() {
    let r = report(Parallelism::Parallel, &Criteria::default());
    let sk = json("examples/digits/reference_metrics.json");
    // Our float predictions are scikit-learn's `predict` row for row...
    assert_eq!(
        r.predictions
            .float
            .iter()
            .map(|&c| c as u64)
            .collect::<Vec<_>>(),
        u64s(&sk["predictions"])
    );
    // ...so the counts, the matrix and the per-class scores must be scikit-learn's exactly.
    check_against_sklearn(&r, true, &sk);
    let acc = r.accuracy.as_ref().unwrap();
    assert_eq!(acc.float.rows, sk["rows"].as_u64().unwrap());
}

#[test]
fn float_and_int8_metrics_equal_scikit_learn_on_our_predictions() {
    let r = report(Parallelism::Parallel, &Criteria::default());
    let fixture = path("tests/fixtures/vet/digits_predictions.json");
    let ours = serde_json::json!({
        "source": "kinglet vet on examples/digits/heldout.csv: model.onnx (f32) against its int8 pack calibrated on calibration.csv with min/max ranges",
        "labels": r.predictions.labels,
        "float": r.predictions.float,
        "int8": r.predictions.int8,
    });
    if std::env::var_os("KINGLET_BLESS").is_some() {
        std::fs::write(&fixture, serde_json::to_string(&ours).unwrap() + "\n").unwrap();
    }
    let committed: Value = json("tests/fixtures/vet/digits_predictions.json");
    assert_eq!(
        committed, ours,
        "the predictions changed; if deliberate, rerun with KINGLET_BLESS=1 and regenerate tests/python/vet_ref.py's outputs"
    );
    let sk = json("tests/fixtures/vet/digits_sklearn.json");
    check_against_sklearn(&r, true, &sk["float"]);
    check_against_sklearn(&r, false, &sk["int8"]);
}

#[test]
fn statistics_equal_scipy() {
    let cases = json("tests/fixtures/vet/stats_cases.json");
    let cases = cases["cases"].as_array().unwrap();
    assert!(cases.len() >= 10);
    for c in cases {
        let t = u64s(&c["table"]);
        let table = PairedCounts {
            both_right: t[0],
            first_only: t[1],
            second_only: t[2],
            both_wrong: t[3],
        };
        let n = table.total();
        let close = |a: f64, b: f64, what: &str| {
            assert!((a - b).abs() < 1e-12, "{t:?} {what}: ours {a}, scipy {b}")
        };
        let (w1, w2) = (f64s(&c["wilson_first"]), f64s(&c["wilson_second"]));
        let (l1, u1) = wilson(t[0] + t[1], n, Z_95);
        let (l2, u2) = wilson(t[0] + t[2], n, Z_95);
        close(l1, w1[0], "wilson l1");
        close(u1, w1[1], "wilson u1");
        close(l2, w2[0], "wilson l2");
        close(u2, w2[1], "wilson u2");
        close(phi(&table), c["phi"].as_f64().unwrap(), "phi");
        let (lo, hi) = newcombe_paired(&table, Z_95);
        let nc = f64s(&c["newcombe"]);
        close(lo, nc[0], "newcombe lower");
        close(hi, nc[1], "newcombe upper");
        let p = mcnemar_exact(t[1], t[2]);
        let sp = c["mcnemar_p"].as_f64().unwrap();
        assert!(
            (p - sp).abs() <= 1e-10 * sp.max(1e-300) + 1e-15,
            "{t:?} McNemar: ours {p}, scipy {sp}"
        );
    }
}

#[test]
fn parallel_run_equals_serial_run() {
    let criteria = Criteria {
        max_drop_pp: Some(0.5),
        gate: Some(Gate::Estimate),
        min_agreement_pct: Some(99.0),
        ..Criteria::default()
    };
    let serial = report(Parallelism::Serial, &criteria);
    // Four workers on two cores, so rows really are spread over threads and finish out of order.
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(4)
        .build()
        .unwrap();
    let parallel = pool.install(|| report(Parallelism::Parallel, &criteria));
    assert_eq!(serial, parallel);
    assert_eq!(
        serde_json::to_string(&serial).unwrap(),
        serde_json::to_string(&parallel).unwrap()
    );
}

#[test]
fn digits_numbers_for_the_record() {
    let r = report(
        Parallelism::Parallel,
        &Criteria {
            max_drop_pp: Some(0.5),
            ..Criteria::default()
        },
    );
    let a = r.accuracy.as_ref().unwrap();
    eprintln!(
        "float {}/{}, int8 {}/{}, drop {:.3} pp [{:.3}, {:.3}], agreement {}/{}, SQNR {:?}",
        a.float.correct,
        a.float.rows,
        a.int8.correct,
        a.int8.rows,
        a.drop_pp,
        a.drop_interval_pp.lower,
        a.drop_interval_pp.upper,
        r.agreement.agree,
        r.agreement.rows,
        r.fidelity.iter().map(|f| f.sqnr_db).collect::<Vec<_>>()
    );
    // Consistency of the pieces: the drop is the paired difference, the interval contains it,
    // every stage has a finite SQNR, agreement counts the disagreement list.
    assert!((a.drop_pp - 100.0 * (a.float.accuracy - a.int8.accuracy)).abs() < 1e-9);
    assert!(a.drop_interval_pp.lower <= a.drop_pp && a.drop_pp <= a.drop_interval_pp.upper);
    assert_eq!(r.fidelity.len(), 4);
    assert!(r
        .fidelity
        .iter()
        .all(|f| f.sqnr_db.is_some_and(f64::is_finite)));
    assert_eq!(
        r.agreement.rows - r.agreement.agree,
        r.agreement.disagreements.len() as u64
    );
    assert_eq!(r.verdict.as_ref().map(|v| v.passed), Some(a.drop_pp <= 0.5));
    // The noise split: clipping and rounding add up to the total on every tensor, and the
    // held-out rows have input values beyond the calibration range (docs/vet.md).
    for f in &r.fidelity {
        let e = &f.energy;
        assert!(
            (e.clip_noise + e.round_noise - e.noise).abs() <= 1e-9 * e.noise,
            "{f:?}"
        );
        assert_eq!(f.clipped, e.clipped);
        assert!(f.rounding_sqnr_db >= f.sqnr_db, "{f:?}");
    }
    assert!(r.fidelity[0].clipped > 0);
}

/// Writes the rows of `d` (repeated `times` times) as `.npy` features and integer labels.
fn save_npy(
    d: &Dataset,
    times: usize,
    dir: &std::path::Path,
) -> (std::path::PathBuf, std::path::PathBuf) {
    use npyz::WriterBuilder;
    let x = dir.join("rows.npy");
    let y = dir.join("labels.npy");
    let mut buf = Vec::new();
    {
        let mut w = npyz::WriteOptions::<f32>::new()
            .default_dtype()
            .shape(&[(d.rows * times) as u64, d.width as u64])
            .writer(&mut buf)
            .begin_nd()
            .unwrap();
        for _ in 0..times {
            w.extend(d.features.iter().copied()).unwrap();
        }
        w.finish().unwrap();
    }
    std::fs::write(&x, &buf).unwrap();
    let labels: Vec<i64> = d
        .labels
        .as_ref()
        .unwrap()
        .iter()
        .map(|l| l.parse().unwrap())
        .collect();
    let mut buf = Vec::new();
    {
        let mut w = npyz::WriteOptions::<i64>::new()
            .default_dtype()
            .shape(&[(d.rows * times) as u64])
            .writer(&mut buf)
            .begin_nd()
            .unwrap();
        for _ in 0..times {
            w.extend(labels.iter().copied()).unwrap();
        }
        w.finish().unwrap();
    }
    std::fs::write(&y, &buf).unwrap();
    (x, y)
}

#[test]
fn streamed_rows_give_the_whole_file_report() {
    use kinglet_converter::dataset::{load_file, LoadOptions, RowStream};
    use kinglet_converter::score::Entry;
    use kinglet_converter::vet::{Engine, How};
    let (f, q) = blobs();
    let pair = ModelPair::new(Model::parse(&f).unwrap(), Model::parse(&q).unwrap()).unwrap();
    let dir = tempfile::tempdir().unwrap();
    let criteria = Criteria {
        max_drop_pp: Some(1.0),
        benign: vec!["0".into()],
        ..Criteria::default()
    };
    // Once (the rows scikit-learn's metrics were checked on), and twice over (every row
    // repeated: the repeat count and its note).
    for times in [1, 2] {
        let (x, y) = save_npy(&heldout(), times, dir.path());
        let opts = LoadOptions {
            label_file: Some(y),
            ..LoadOptions::default()
        };
        let whole = load_file(&x, &opts).unwrap();
        for engine in [Engine::Batched, Engine::PerRow] {
            let how = How {
                parallelism: Parallelism::Parallel,
                engine,
            };
            let expected = vet::vet_rows(
                &pair,
                &kinglet_converter::score::Rows::floats(whole.clone()),
                Entry::Infer,
                &Sources::default(),
                &criteria,
                how,
                &|_| {},
            )
            .unwrap();
            assert_eq!(
                expected.repeated_rows,
                (times as u64 - 1) * whole.rows as u64 / times as u64
            );
            // 7 rows: many chunks, each smaller than a batch; 1,100: more than a batch of 1,024.
            for chunk in [7, 1100] {
                let mut s = RowStream::open(&x, &opts).unwrap();
                assert!(s.streamed());
                let got = vet::vet_stream(
                    &pair,
                    &mut s,
                    Entry::Infer,
                    &Sources::default(),
                    &criteria,
                    how,
                    chunk,
                    &|_| {},
                )
                .unwrap();
                assert_eq!(got, expected, "{times}x, {engine:?}, chunks of {chunk}");
            }
        }
        if times == 1 {
            // The streamed report is the one checked against scikit-learn above.
            let mut s = RowStream::open(&x, &opts).unwrap();
            let r = vet::vet_stream(
                &pair,
                &mut s,
                Entry::Infer,
                &Sources::default(),
                &Criteria::default(),
                Parallelism::Serial,
                13,
                &|_| {},
            )
            .unwrap();
            let sk = json("tests/fixtures/vet/digits_sklearn.json");
            check_against_sklearn(&r, true, &sk["float"]);
            check_against_sklearn(&r, false, &sk["int8"]);
        }
    }
}
