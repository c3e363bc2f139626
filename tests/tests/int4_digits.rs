//! End to end with int4 weights (`runtime/FORMAT.md` §3.5) on the bundled digits example: the
//! scikit-learn MLP's ONNX export packed with `--weights int4` (and per layer), checked against
//! a numpy reference of the int4 weights and against the float model on the held-out rows.
//!
//! References: `tests/fixtures/int4/digits_int4.json` is numpy's symmetric per-channel int4
//! quantisation of the ONNX file's weights (`s = max|w| / 7`, `rint`, clip to ±7), written by
//! `tests/python/int4_ref.py`; the held-out rows and labels are those of
//! `sklearn.datasets.load_digits` in `examples/digits/` (see `digits_pack.rs`).
use kinglet_converter::dataset::{load_csv, CsvOptions, Dataset, LabelColumn};
use kinglet_converter::import::import_file;
use kinglet_converter::pack::{pack_f32, pack_int8_with, Int8Options, Sections};
use kinglet_converter::quantise::calibrate::RangeMethod;
use kinglet_converter::quantise::weight_bits::{LayerBits, WeightBits};
use kinglet_runtime::unstable::wire::format::WeightLayout;
use kinglet_runtime::unstable::wire::nibble;
use kinglet_runtime::Model;
use kinglet_tests::{path, run};

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

fn pack(weights: LayerBits, sections: Sections) -> Vec<u8> {
    let model = import_file(&path("examples/digits/model.onnx")).unwrap();
    let calib = rows("examples/digits/calibration.csv", false);
    let opts = Int8Options {
        sections,
        weights,
        ..RangeMethod::MinMax.into()
    };
    pack_int8_with(&model, &calib, opts).unwrap().blob
}

/// Top-1 agreement with the float pack and the correct counts (float, quantised) on the
/// held-out rows.
fn agreement(q: &Model<'_>) -> (usize, usize, usize, usize) {
    let model = import_file(&path("examples/digits/model.onnx")).unwrap();
    let f = pack_f32(&model).unwrap();
    let mf = Model::parse(&f).unwrap();
    let data = rows("examples/digits/heldout.csv", true);
    let labels = data.labels.as_ref().unwrap();
    let (mut agree, mut right_f, mut right_q) = (0, 0, 0);
    for (r, label) in labels.iter().enumerate() {
        let label: usize = label.parse().unwrap();
        let (cf, _) = run(&mf, data.row(r));
        let (cq, _) = run(q, data.row(r));
        agree += usize::from(cf == cq);
        right_f += usize::from(cf == label);
        right_q += usize::from(cq == label);
    }
    (agree, right_f, right_q, data.rows)
}

#[test]
fn int4_weights_are_numpys_and_the_blob_is_version_6() {
    let blob = pack(LayerBits::all(WeightBits::Int4), Sections::ALL);
    let m = Model::parse(&blob).unwrap();
    assert_eq!(u16::from_le_bytes([blob[4], blob[5]]), 6);
    let want: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(path("tests/fixtures/int4/digits_int4.json")).unwrap(),
    )
    .unwrap();
    let want = want["layers"].as_array().unwrap();
    assert_eq!(want.len(), m.layers().count());
    for (k, (l, w)) in m.layers().zip(want).enumerate() {
        let d = l.desc;
        let (n, o) = (d.inputs as usize, d.outputs as usize);
        assert_eq!(d.layout, WeightLayout::Nibble4x4, "layer {k}");
        assert_eq!(
            (n, o),
            (
                w["inputs"].as_u64().unwrap() as usize,
                w["outputs"].as_u64().unwrap() as usize
            )
        );
        let (pad, data) = nibble::split(d.weights, n, o).unwrap();
        assert!(pad.len() <= 3);
        // Flash of the weights: ⌈inputs / 2⌉ · outputs bytes plus padding under one block.
        assert_eq!(data.len(), nibble::bytes(n, o));
        assert!(data.len() - n.div_ceil(2) * o < n.div_ceil(4) * 4 / 2 * 4);
        let q: Vec<i64> = w["weights"]
            .as_array()
            .unwrap()
            .iter()
            .map(|v| v.as_i64().unwrap())
            .collect();
        for oo in 0..o {
            for i in 0..n {
                let got = nibble::get(data, oo, i, n).unwrap();
                assert_eq!(i64::from(got), q[oo * n + i], "layer {k} ({oo}, {i})");
            }
        }
        // The weight scales kept in the blob (Sections::ALL) are numpy's float32 scales.
        let scales: Vec<f32> = d
            .quant
            .unwrap()
            .weight_scale
            .chunks_exact(4)
            .map(|c| f32::from_le_bytes([c[0], c[1], c[2], c[3]]))
            .collect();
        let ws: Vec<f32> = w["scales"]
            .as_array()
            .unwrap()
            .iter()
            .map(|v| v.as_f64().unwrap() as f32)
            .collect();
        assert_eq!(scales, ws, "layer {k} scales");
    }
}

#[test]
fn int4_pack_against_float_on_held_out_rows() {
    let int8 = pack(LayerBits::default(), Sections::default());
    let int4 = pack(LayerBits::all(WeightBits::Int4), Sections::default());
    let mixed = pack(
        LayerBits::parse("0:int8,1:int4,2:int4").unwrap(),
        Sections::default(),
    );
    let mut figures = Vec::new();
    for (name, blob) in [("int8", &int8), ("int4", &int4), ("int8+int4", &mixed)] {
        let m = Model::parse(blob).unwrap();
        let (agree, right_f, right_q, n) = agreement(&m);
        eprintln!(
            "{name}: {} bytes, agreement with float {agree}/{n}, correct float {right_f}, quantised {right_q}",
            blob.len()
        );
        figures.push((name, blob.len(), agree, right_q, n));
    }
    // The int4 blob is smaller than the int8 one by about half the weights' bytes:
    // 64·64 + 64·32 + 32·12 (padded) = 6,528 int8 weight bytes, 3,264 as int4.
    let (b8, b4) = (figures[0].1, figures[1].1);
    assert!(
        b8 - b4 >= 3_200 && b8 - b4 <= 3_300,
        "int8 {b8} B, int4 {b4} B"
    );
    assert!(figures[2].1 > b4 && figures[2].1 < b8);
    // No accuracy goal is set for int4 (issue 15); this floor only catches a broken pack:
    // a 16-level grid per channel keeps most of this small MLP's decisions (our own sanity
    // bound, common practice, no source).
    for &(name, _, agree, _, n) in &figures {
        assert!(agree * 10 >= n * 8, "{name}: agreement {agree}/{n}");
    }
}

/// `inspect`'s instruction estimate counts an int4 layer at the int4 rate: the all-int4 blob's
/// estimate exceeds the int8 blob's by exactly its padded MACs (64·64 + 64·32 + 32·12) times
/// `per_mac_int4 − per_mac` of each int8 rate (the rest of the model is the same), and a
/// model with int4 on layer 2 only by that layer's share. (The rates themselves are checked
/// against the whole digits model with int4 weights by `scripts/kernel-bench.sh --check`.)
#[test]
fn the_instruction_estimate_counts_int4_layers_at_their_rate() {
    use kinglet_converter::report::cycles::{Weights, RATES};
    use kinglet_converter::report::inspect::BlobReport;
    let est = |blob: &[u8]| BlobReport::of(&Model::parse(blob).unwrap()).instruction_estimate;
    let int8 = est(&pack(LayerBits::default(), Sections::default()));
    let int4 = est(&pack(LayerBits::all(WeightBits::Int4), Sections::default()));
    let mixed = est(&pack(
        LayerBits::parse("0:int8,1:int4,2:int8").unwrap(),
        Sections::default(),
    ));
    let rates: Vec<_> = RATES
        .iter()
        .filter(|r| r.weights == Weights::Int8)
        .collect();
    assert!(!int8.is_empty() && int8.len() == int4.len() && int8.len() == mixed.len());
    for ((a, b), c) in int8.iter().zip(&int4).zip(&mixed) {
        let r = rates
            .iter()
            .find(|r| r.target == a.target && r.feed == a.feed)
            .unwrap();
        let extra = r.per_mac_int4 - r.per_mac;
        assert!(extra > 0.0, "{}: int4 costs more per MAC", r.target);
        let got = b.instructions as f64 - a.instructions as f64;
        let want = (64.0 * 64.0 + 64.0 * 32.0 + 32.0 * 12.0) * extra;
        assert!((got - want).abs() <= 1.0, "{}: {got} vs {want}", r.target);
        let got_mixed = c.instructions as f64 - a.instructions as f64;
        assert!(
            (got_mixed - 64.0 * 32.0 * extra).abs() <= 1.0,
            "{}",
            r.target
        );
    }
}
