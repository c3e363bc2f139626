//! What must hold for a model an importer accepted: packing it either fails with an error or
//! yields a blob the runtime reads back, and that blob survives the extreme inputs.
use kinglet_converter::dataset::Dataset;
use kinglet_converter::graph::FloatModel;
use kinglet_converter::pack::{
    pack_f32, pack_int8, pack_int8_with, FoldScaler, Int8Options, Sections,
};
use kinglet_converter::quantise::calibrate::RangeMethod;
use kinglet_runtime::Model;

use crate::oracle;

/// Widest model the int8 path is exercised on (calibration rows are built per feature).
const MAX_CAL_WIDTH: usize = 4096;

/// Packs `model` as f32 and, calibrated on a few rows derived from `seed`, as int8.
pub fn pack_and_run(model: &FloatModel, seed: &[u8]) {
    if let Ok(blob) = pack_f32(model) {
        match Model::parse(&blob) {
            Ok(m) => oracle::run_extremes(&m),
            Err(e) => panic!("pack_f32 wrote a blob the runtime rejects: {e}"),
        }
    }
    let width = model.input_len;
    if width == 0 || width > MAX_CAL_WIDTH {
        return;
    }
    let mut features = Vec::new();
    for base in [0.0f32, 1.0, -1.0] {
        features.extend(std::iter::repeat_n(base, width));
    }
    for (i, b) in seed.iter().take(4 * width).enumerate() {
        features.push((f32::from(*b) - 128.0) * if i % 2 == 0 { 0.1 } else { 10.0 });
    }
    let rows = features.len() / width;
    features.truncate(rows * width);
    let data = Dataset {
        rows,
        width,
        features,
        labels: None,
        source: "fuzz".into(),
    };
    for method in [
        RangeMethod::MinMax,
        RangeMethod::Percentile(99.0),
        RangeMethod::LeastError,
    ] {
        if let Ok(p) = pack_int8(model, &data, method) {
            match Model::parse(&p.blob) {
                Ok(m) => oracle::run_extremes(&m),
                Err(e) => panic!("pack_int8 wrote a blob the runtime rejects: {e}"),
            }
        }
    }
    // Bias correction and the folded scaler change the biases and the first layer's weights.
    let opts = Int8Options {
        method: RangeMethod::MinMax,
        bias_correction: true,
        fold_scaler: FoldScaler::Try,
        sections: Sections::ALL,
        ..RangeMethod::MinMax.into()
    };
    if let Ok(p) = pack_int8_with(model, &data, opts) {
        match Model::parse(&p.blob) {
            Ok(m) => oracle::run_extremes(&m),
            Err(e) => panic!("pack_int8_with wrote a blob the runtime rejects: {e}"),
        }
    }
    // An int16 input tensor (format version 7) with widened layer ranges: its first layer's
    // accumulator bound is the int16 one, which pack must prove or refuse.
    let opts = Int8Options {
        sections: Sections::ALL,
        input: kinglet_runtime::unstable::wire::format::InputWidth::I16,
        headroom: 2.0,
        ..RangeMethod::MinMax.into()
    };
    if let Ok(p) = pack_int8_with(model, &data, opts) {
        match Model::parse(&p.blob) {
            Ok(m) => oracle::run_extremes(&m),
            Err(e) => panic!("pack_int8_with (int16 input) wrote a blob the runtime rejects: {e}"),
        }
    }
}
