//! Packing: a [`FloatModel`] into an f32 blob, or, with a calibration set, into an int8 blob.
//! Every layer is written in the runtime's `Blocked4x4` layout (4-row blocks, int8 excess-128,
//! data 4-byte aligned within the blob; `FORMAT.md` §3.1), the order the Cortex-M kernels read,
//! by `kinglet_builder` with the runtime's own geometry and validating encoder.
pub(crate) mod table;

use anyhow::Result;
use kinglet_builder::OwnedLayer;
use kinglet_runtime::format::{Precision, WeightLayout};
use kinglet_runtime::Model;

use crate::dataset::Dataset;
use crate::graph::FloatModel;
use crate::quantise::calibrate::{calibrate, RangeMethod, TensorRange};
use crate::quantise::quantise;
use table::{owned_table, wire_u32};

/// The f32 blob of `model` (for FPU boards, and the float reference of comparisons).
pub fn pack_f32(model: &FloatModel) -> Result<Vec<u8>> {
    let layers = model
        .layers
        .iter()
        .map(|l| {
            Ok(OwnedLayer::f32(
                wire_u32(l.inputs, "layer width")?,
                wire_u32(l.outputs, "layer width")?,
                l.activation,
                &l.weights,
                &l.bias,
            ))
        })
        .collect::<Result<Vec<_>>>()?;
    let owned = owned_table(model, Precision::F32, None, layers)?;
    Ok(owned.encode_in(WeightLayout::Blocked4x4)?)
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
    let blob = quantise(model, &ranges)?.encode_in(WeightLayout::Blocked4x4)?;
    Ok(Int8Pack {
        blob,
        method,
        ranges,
        calibration_rows: data.rows,
    })
}
