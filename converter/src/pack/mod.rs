//! Packing: a [`FloatModel`] into an f32 blob, or, with a calibration set, into an int8 blob.
pub mod layout;
pub mod owned;

use anyhow::Result;
use kinglet_runtime::format::Precision;
use kinglet_runtime::Model;

use crate::dataset::Dataset;
use crate::graph::FloatModel;
use crate::quantise::calibrate::{calibrate, RangeMethod, TensorRange};
use crate::quantise::quantise;
use owned::{OwnedLayer, OwnedModel};

/// The f32 blob of `model` (for FPU boards, and the float reference of comparisons).
pub fn pack_f32(model: &FloatModel) -> Result<Vec<u8>> {
    let owned = OwnedModel {
        input_len: model.input_len,
        precision: Precision::F32,
        scaler: model
            .scaler
            .as_ref()
            .map(|s| (s.offset.clone(), s.scale.clone())),
        input_quant: None,
        layers: model
            .layers
            .iter()
            .map(|l| OwnedLayer::f32(l.inputs, l.outputs, l.activation, &l.weights, &l.bias))
            .collect(),
        output: model.output,
        labels: model.labels.clone(),
    };
    owned.encode()
}

/// An int8 pack and how it was calibrated.
#[derive(Debug, Clone)]
pub struct Int8Pack {
    /// The blob.
    pub blob: Vec<u8>,
    /// The calibration method used.
    pub method: RangeMethod,
    /// The calibrated range of each tensor (scaled input, then each layer output).
    pub ranges: Vec<TensorRange>,
    /// Rows in the calibration set.
    pub calibration_rows: usize,
}

/// Calibrates on `data` (raw feature rows) with `method` and packs the int8 blob.
pub fn pack_int8(model: &FloatModel, data: &Dataset, method: RangeMethod) -> Result<Int8Pack> {
    let float_blob = pack_f32(model)?;
    let float_model = Model::parse(&float_blob)
        .map_err(|e| anyhow::anyhow!("internal: float pack rejected: {e}"))?;
    let ranges = calibrate(&float_model, data, method)?;
    let blob = quantise(model, &ranges)?.encode()?;
    Ok(Int8Pack {
        blob,
        method,
        ranges,
        calibration_rows: data.rows,
    })
}
