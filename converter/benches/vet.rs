//! Vetting speed against numpy: 10,000 rows of a 784-100-10 softmax classifier (random
//! weights, seeded), run through both the f32 and the int8 blob by `kinglet vet`, side by side
//! with numpy doing the float forward pass alone in one process.
//!
//! Run with `cargo bench -p kinglet-converter --bench vet` (needs the reference venv,
//! `bash tests/python/setup_venv.sh`; set `KINGLET_PYTHON` to use another interpreter). Prints
//! a table; the goal (our whole comparison in less wall time than numpy's forward pass) is read
//! from the table, not asserted.
use kinglet_builder::npy::npy_bytes;
use kinglet_converter::dataset::Dataset;
use kinglet_converter::graph::{
    Activation, DenseLayer, FloatModel, OutputKind, Scaler, ScalerKind,
};
use kinglet_converter::host::{FloatHost, Int8Host};
use kinglet_converter::pack::{pack_f32, pack_int8};
use kinglet_converter::quantise::calibrate::RangeMethod;
use kinglet_converter::vet::run::BATCH;
use kinglet_converter::vet::{self, Criteria, ModelPair, Parallelism, Sources};
use kinglet_runtime::Model;
use rayon::prelude::*;
use std::path::{Path, PathBuf};
use std::process::Command;
use std::time::Instant;

const ROWS: usize = 10_000;
const INPUTS: usize = 784;
const HIDDEN: usize = 100;
const CLASSES: usize = 10;
const PIXEL_SCALE: f32 = 1.0 / 255.0;

/// A small deterministic generator (SplitMix64), so the bench needs no extra crate.
struct Rng(u64);
impl Rng {
    fn next_u64(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }
    /// Uniform in [0, 1).
    fn unit(&mut self) -> f32 {
        (self.next_u64() >> 40) as f32 / (1u64 << 24) as f32
    }
}

fn dense(rng: &mut Rng, inputs: usize, outputs: usize, activation: Activation) -> DenseLayer {
    let bound = (6.0 / inputs as f32).sqrt(); // He-style uniform range (common practice, no source)
    let weights = (0..inputs * outputs)
        .map(|_| (rng.unit() * 2.0 - 1.0) * bound)
        .collect();
    let bias = (0..outputs).map(|_| (rng.unit() - 0.5) * 0.1).collect();
    DenseLayer {
        inputs,
        outputs,
        weights,
        bias,
        activation,
    }
}

/// Writes `data` as a C-order `.npy` array of `shape`.
fn write_npy<T: npyz::AutoSerialize>(path: &Path, shape: &[usize], data: &[T]) {
    let shape: Vec<u64> = shape.iter().map(|&d| d as u64).collect();
    std::fs::write(path, npy_bytes(&shape, data))
        .unwrap_or_else(|e| panic!("{}: {e}", path.display()));
}

fn median(mut t: Vec<f64>) -> f64 {
    t.sort_by(f64::total_cmp);
    t[t.len() / 2]
}

/// The two batched forward passes over every row of `data` (what numpy's pass is compared
/// with): f32 and int8, batches of `vet::run::BATCH` rows over rayon's threads, as `vet` runs
/// them (the f32 pass as `run_lean`: vet scales an input row where it reads it). Seconds.
fn passes(fh: &FloatHost, qh: &Int8Host, data: &Dataset) -> f64 {
    passes_of(fh, qh, data, (true, true))
}

/// [`passes`], the f32 and int8 sides each only if asked for (`sides`).
fn passes_of(fh: &FloatHost, qh: &Int8Host, data: &Dataset, sides: (bool, bool)) -> f64 {
    let t = Instant::now();
    let batches = data.rows.div_ceil(BATCH);
    let sum: usize = (0..batches)
        .into_par_iter()
        .map(|b| {
            let (start, n) = (b * BATCH, BATCH.min(data.rows - b * BATCH));
            let x = &data.features[start * data.width..(start + n) * data.width];
            let f = sides.0.then(|| fh.run_lean(x, n).expect("f32 pass"));
            let q = sides.1.then(|| {
                qh.run(n, |r| kinglet_runtime::Input::F32(data.row(start + r)))
                    .expect("int8 pass")
            });
            f.map_or(0, |f| f.class.iter().sum::<usize>())
                + q.map_or(0, |q| q.infer_class.iter().sum::<usize>())
        })
        .sum();
    std::hint::black_box(sum);
    t.elapsed().as_secs_f64()
}

fn python() -> PathBuf {
    std::env::var_os("KINGLET_PYTHON")
        .map(PathBuf::from)
        .unwrap_or_else(|| Path::new(env!("CARGO_MANIFEST_DIR")).join("../.venv/bin/python"))
}

fn main() {
    let mut rng = Rng(0x00C0_FFEE);
    let model = FloatModel {
        input_len: INPUTS,
        scaler: Some(Scaler {
            kind: ScalerKind::Uniform,
            offset: vec![0.0],
            scale: vec![PIXEL_SCALE],
        }),
        layers: vec![
            dense(&mut rng, INPUTS, HIDDEN, Activation::Relu),
            dense(&mut rng, HIDDEN, CLASSES, Activation::Linear),
        ],
        output: OutputKind::Softmax,
        labels: vec![],
    };
    // Pixel-like rows: integers 0..=255, most of them dark.
    let features: Vec<f32> = (0..ROWS * INPUTS)
        .map(|_| {
            let u = rng.unit();
            if u < 0.6 {
                0.0
            } else {
                (rng.unit() * 255.0).round()
            }
        })
        .collect();
    let labels: Vec<i64> = (0..ROWS)
        .map(|_| (rng.next_u64() % CLASSES as u64) as i64)
        .collect();
    let data = Dataset {
        rows: ROWS,
        width: INPUTS,
        features,
        labels: Some(labels.iter().map(|l| l.to_string()).collect()),
        source: "generated".into(),
    };
    let calib = Dataset {
        rows: 1000,
        features: data.features[..1000 * INPUTS].to_vec(),
        labels: None,
        ..data.clone()
    };
    let f32_blob = pack_f32(&model).expect("f32 pack");
    let int8_blob = pack_int8(&model, &calib, RangeMethod::MinMax)
        .expect("int8 pack")
        .blob;

    // `cargo bench --bench vet -- passes [N]`: only the two batched forward passes, N times
    // (default 20), one line of times, then each side alone and the int8 side on its portable
    // product; no numpy. For a profiler.
    let args: Vec<String> = std::env::args().skip(1).collect();
    if let Some(at) = args.iter().position(|a| a == "passes") {
        let n = args
            .get(at + 1)
            .and_then(|v| v.parse().ok())
            .unwrap_or(20usize);
        let (fm, qm) = (
            Model::parse(&f32_blob).expect("parse"),
            Model::parse(&int8_blob).expect("parse"),
        );
        let (fh, qh) = (
            FloatHost::new(&fm).expect("f32 host"),
            Int8Host::new(&qm).expect("int8 host"),
        );
        let portable = Int8Host::portable(&qm).expect("int8 host");
        let cases: [(&str, &Int8Host, (bool, bool)); 4] = [
            ("f32 + int8 passes", &qh, (true, true)),
            ("f32 pass alone", &qh, (true, false)),
            ("int8 pass alone", &qh, (false, true)),
            (
                "int8 pass alone, portable product",
                &portable,
                (false, true),
            ),
        ];
        for (name, q, sides) in cases {
            let t: Vec<f64> = (0..n).map(|_| passes_of(&fh, q, &data, sides)).collect();
            let best = t.iter().copied().fold(f64::INFINITY, f64::min);
            println!(
                "{name:<36} {n} runs, median {:.4} s, best {best:.4} s",
                median(t)
            );
        }
        return;
    }

    let dir = tempfile::tempdir().expect("temp dir");
    let d = dir.path();
    std::fs::write(d.join("model.f32.kgl"), &f32_blob).expect("write");
    std::fs::write(d.join("model.int8.kgl"), &int8_blob).expect("write");
    write_npy(&d.join("x.npy"), &[ROWS, INPUTS], &data.features);
    write_npy(&d.join("labels.npy"), &[ROWS], &labels);
    let (l1, l2) = (&model.layers[0], &model.layers[1]);
    write_npy(&d.join("w1.npy"), &[HIDDEN, INPUTS], &l1.weights);
    write_npy(&d.join("b1.npy"), &[HIDDEN], &l1.bias);
    write_npy(&d.join("w2.npy"), &[CLASSES, HIDDEN], &l2.weights);
    write_npy(&d.join("b2.npy"), &[CLASSES], &l2.bias);
    std::fs::write(d.join("scale.txt"), format!("{PIXEL_SCALE:e}")).expect("write");

    // numpy: forward pass timed inside the process, and the whole process from outside.
    let script = Path::new(env!("CARGO_MANIFEST_DIR")).join("benches/vet_numpy.py");
    let mut np_process = Vec::new();
    let mut np_json = String::new();
    for _ in 0..3 {
        let t = Instant::now();
        let out = Command::new(python())
            .arg(&script)
            .arg(d)
            .output()
            .expect("run python");
        np_process.push(t.elapsed().as_secs_f64());
        assert!(
            out.status.success(),
            "numpy script failed: {}",
            String::from_utf8_lossy(&out.stderr)
        );
        np_json = String::from_utf8_lossy(&out.stdout).trim().to_string();
    }
    let np: serde_json::Value = serde_json::from_str(&np_json).expect("numpy JSON");

    // Ours, in process: the evaluation and report (parallel and serial).
    let (fm, qm) = (
        Model::parse(&f32_blob).expect("parse"),
        Model::parse(&int8_blob).expect("parse"),
    );
    let pair = ModelPair::new(fm, qm).expect("pair");
    let run = |p: Parallelism| {
        let t = Instant::now();
        let r = vet::vet(
            &pair,
            &data,
            &Sources::default(),
            &Criteria::default(),
            p,
            &|_| {},
        )
        .expect("vet");
        (t.elapsed().as_secs_f64(), r)
    };
    let (par_t, par_r): (Vec<f64>, Vec<_>) = (0..5).map(|_| run(Parallelism::Parallel)).unzip();
    let (ser_t, ser_r): (Vec<f64>, Vec<_>) = (0..3).map(|_| run(Parallelism::Serial)).unzip();
    assert_eq!(par_r[0], ser_r[0], "parallel and serial reports differ");
    let our_class_sum: usize = par_r[0].predictions.float.iter().sum();
    // The per-row engine (each row through `Model::infer_traced`, as before batching).
    let rows_fed = kinglet_converter::score::Rows::floats(data.clone());
    let per_row = |p: Parallelism| {
        let t = Instant::now();
        let r = vet::vet_rows(
            &pair,
            &rows_fed,
            kinglet_converter::score::Entry::Infer,
            &Sources::default(),
            &Criteria::default(),
            vet::How {
                parallelism: p,
                engine: vet::Engine::PerRow,
            },
            &|_| {},
        )
        .expect("vet");
        (t.elapsed().as_secs_f64(), r)
    };
    let (row_t, row_r): (Vec<f64>, Vec<_>) = (0..2).map(|_| per_row(Parallelism::Parallel)).unzip();
    assert_eq!(
        row_r[0].predictions.int8, par_r[0].predictions.int8,
        "batched and per-row int8 classes differ"
    );

    // The two batched forward passes alone (what numpy's pass is compared with): f32 and int8,
    // batches of `vet::run::BATCH` rows over rayon's threads, as `vet` runs them.
    let fh = FloatHost::new(&pair.float).expect("f32 host");
    let qh = Int8Host::new(&pair.int8).expect("int8 host");
    let pass_t: Vec<f64> = (0..7).map(|_| passes(&fh, &qh, &data)).collect();

    // Where the time goes: each runtime path alone, one thread, all rows.
    let path_time = |m: &Model<'_>| {
        let mut scratch = vec![0u8; m.scratch_bytes()];
        let mut scores = vec![0f32; m.output_len()];
        let t = Instant::now();
        let mut sum = 0usize;
        for r in 0..ROWS {
            sum += m
                .infer(
                    kinglet_runtime::Input::F32(data.row(r)),
                    &mut scratch,
                    &mut scores,
                )
                .map_or(0, |p| p.class);
        }
        std::hint::black_box(sum);
        t.elapsed().as_secs_f64()
    };
    let f32_alone = path_time(&pair.float);
    let int8_alone = path_time(&pair.int8);

    // Ours, as a process: `kinglet vet` on the .npy rows, JSON to a pipe.
    let exe = env!("CARGO_BIN_EXE_kinglet");
    let mut cli = Vec::new();
    for _ in 0..3 {
        let t = Instant::now();
        let out = Command::new(exe)
            .arg("vet")
            .arg(d.join("model.f32.kgl"))
            .arg(d.join("model.int8.kgl"))
            .arg("--data")
            .arg(d.join("x.npy"))
            .arg("--label-file")
            .arg(d.join("labels.npy"))
            .arg("--json")
            .output()
            .expect("run kinglet");
        cli.push(t.elapsed().as_secs_f64());
        assert!(
            out.status.success(),
            "kinglet vet failed: {}",
            String::from_utf8_lossy(&out.stderr)
        );
    }

    let best = |t: &[f64]| t.iter().copied().fold(f64::INFINITY, f64::min);
    println!(
        "vet benchmark: {ROWS} rows, {INPUTS}-{HIDDEN}-{CLASSES} softmax, {} threads for rayon",
        rayon::current_num_threads()
    );
    println!("numpy {}: {}", np["dtype"], np["blas"]);
    println!("{:<62} {:>10} {:>10}", "case", "median s", "best s");
    let np_best = np["forward_best_s"].as_f64().unwrap_or(f64::NAN);
    let rows = [
        (
            "kinglet batched f32 + int8 forward passes (7 runs)",
            median(pass_t.clone()),
            best(&pass_t),
        ),
        (
            "numpy float forward pass only (in process, 5 runs)",
            np["forward_median_s"].as_f64().unwrap_or(f64::NAN),
            np["forward_best_s"].as_f64().unwrap_or(f64::NAN),
        ),
        (
            "numpy whole process (start, load .npy, 5 forward passes)",
            median(np_process.clone()),
            best(&np_process),
        ),
        (
            "kinglet vet, library, parallel: f32 + int8 + report",
            median(par_t.clone()),
            best(&par_t),
        ),
        (
            "kinglet vet --per-row, library, parallel: f32 + int8 + report",
            median(row_t.clone()),
            best(&row_t),
        ),
        (
            "kinglet vet, library, serial: f32 + int8 + report",
            median(ser_t.clone()),
            best(&ser_t),
        ),
        (
            "runtime f32 path alone, serial, Model::infer",
            f32_alone,
            f32_alone,
        ),
        (
            "runtime int8 path alone, serial, Model::infer",
            int8_alone,
            int8_alone,
        ),
        (
            "kinglet vet, whole process (load .npy, both paths, JSON)",
            median(cli.clone()),
            best(&cli),
        ),
    ];
    for (name, med, b) in rows {
        println!("{name:<62} {med:>10.4} {b:>10.4}");
    }
    println!(
        "best times: our two passes / numpy's one pass = {:.2}; vet per-row / vet batched = {:.2}",
        best(&pass_t) / np_best,
        best(&row_t) / best(&par_t)
    );
    println!(
        "float predictions agree with numpy's on the class checksum: {} (ours {our_class_sum}, numpy {})",
        np["class_sum"].as_u64() == Some(our_class_sum as u64),
        np["class_sum"]
    );
}
