//! `make-assets <repo root> <out dir>`: writes the raw input files the firmware embeds.
//!
//! * `digits_heldout_u8.bin`, `digits_heldout_labels.bin`: the first [`DIGITS_ROWS`] rows of
//!   `examples/digits/heldout.csv` (64 pixels 0..=16 as bytes; the label as one byte);
//! * `vibration_replay.bin`, `vibration_replay_labels.bin`: `examples/vibration/replay_windows.npy`
//!   (`int16 [n, 3, 128]`) as little-endian C-order bytes, and `replay_labels.npy` as bytes.
//!
//! Every value is range-checked; a bad cell is reported with its file, row and column.
use anyhow::{bail, ensure, Context, Result};
use std::path::{Path, PathBuf};

/// Digits rows the firmware carries (150 `u8` vectors, 20 `f32`, 10 for the float model).
const DIGITS_ROWS: usize = 180;
const PIXELS: usize = 64;

fn digits(root: &Path) -> Result<(Vec<u8>, Vec<u8>)> {
    let path = root.join("examples/digits/heldout.csv");
    let mut reader =
        csv::Reader::from_path(&path).with_context(|| format!("opening {}", path.display()))?;
    let header = reader
        .headers()
        .with_context(|| format!("{}: reading the header", path.display()))?;
    let expected: Vec<String> = (0..PIXELS)
        .map(|i| format!("f{i}"))
        .chain(["label".to_string()])
        .collect();
    ensure!(
        header.iter().eq(expected.iter().map(String::as_str)),
        "{}: header must be f0..f63,label",
        path.display()
    );
    let (mut pixels, mut labels) = (Vec::new(), Vec::new());
    for (row, record) in reader.records().take(DIGITS_ROWS).enumerate() {
        let record = record.with_context(|| format!("{}: row {}", path.display(), row + 1))?;
        for (col, cell) in record.iter().enumerate() {
            let v: u8 = cell
                .trim()
                .parse()
                .ok()
                .filter(|&v| if col < PIXELS { v <= 16 } else { v <= 9 })
                .with_context(|| {
                    format!(
                        "{}: row {}, column {}: {cell:?} is not a pixel 0..=16 / label 0..=9",
                        path.display(),
                        row + 1,
                        expected[col]
                    )
                })?;
            if col < PIXELS {
                pixels.push(v)
            } else {
                labels.push(v)
            }
        }
    }
    ensure!(
        labels.len() == DIGITS_ROWS,
        "{}: needs {DIGITS_ROWS} rows, has {}",
        path.display(),
        labels.len()
    );
    Ok((pixels, labels))
}

fn npy_shape(path: &Path) -> Result<(npyz::NpyFile<std::io::BufReader<std::fs::File>>, Vec<u64>)> {
    let file = std::fs::File::open(path).with_context(|| format!("opening {}", path.display()))?;
    let npy = npyz::NpyFile::new(std::io::BufReader::new(file))
        .with_context(|| format!("{}: not an NPY file", path.display()))?;
    let shape = npy.shape().to_vec();
    Ok((npy, shape))
}

fn replay(root: &Path) -> Result<(Vec<u8>, Vec<u8>)> {
    let wpath = root.join("examples/vibration/replay_windows.npy");
    let (npy, shape) = npy_shape(&wpath)?;
    ensure!(
        shape.len() == 3 && shape[1] == 3 && shape[2] == 128,
        "{}: shape {shape:?}, expected [n, 3, 128]",
        wpath.display()
    );
    ensure!(
        npy.order() == npyz::Order::C,
        "{}: expected C order",
        wpath.display()
    );
    let samples: Vec<i16> = npy
        .into_vec()
        .with_context(|| format!("{}: expected int16 data", wpath.display()))?;
    let windows: Vec<u8> = samples.iter().flat_map(|s| s.to_le_bytes()).collect();

    let lpath = root.join("examples/vibration/replay_labels.npy");
    let (npy, lshape) = npy_shape(&lpath)?;
    ensure!(
        lshape == [shape[0]],
        "{}: shape {lshape:?}, expected [{}]",
        lpath.display(),
        shape[0]
    );
    let raw: Vec<i64> = npy
        .into_vec()
        .with_context(|| format!("{}: expected int64 labels", lpath.display()))?;
    let mut labels = Vec::with_capacity(raw.len());
    for (i, &l) in raw.iter().enumerate() {
        match u8::try_from(l) {
            Ok(v) if v < 4 => labels.push(v),
            _ => bail!(
                "{}: label {l} at index {i} is not a class 0..=3",
                lpath.display()
            ),
        }
    }
    Ok((windows, labels))
}

fn main() -> Result<()> {
    let args: Vec<PathBuf> = std::env::args_os().skip(1).map(PathBuf::from).collect();
    let [root, out] = args.as_slice() else {
        bail!("usage: make-assets <repo root> <out dir>");
    };
    let (pixels, labels) = digits(root)?;
    let (windows, wlabels) = replay(root)?;
    std::fs::create_dir_all(out).with_context(|| format!("creating {}", out.display()))?;
    for (name, bytes) in [
        ("digits_heldout_u8.bin", &pixels),
        ("digits_heldout_labels.bin", &labels),
        ("vibration_replay.bin", &windows),
        ("vibration_replay_labels.bin", &wlabels),
    ] {
        let path = out.join(name);
        std::fs::write(&path, bytes).with_context(|| format!("writing {}", path.display()))?;
        println!("{}: {} bytes", path.display(), bytes.len());
    }
    Ok(())
}
