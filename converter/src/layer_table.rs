//! A [`FloatModel`]'s shapes, scaler and labels in the blob's wire form (an owned layer table of
//! `kinglet-builder`), refused in the converter's words where the format cannot hold them.
use anyhow::{anyhow, bail, Result};
use kinglet_builder::le::f32s;
use kinglet_builder::{BuildError, OwnedInput, OwnedLayer, OwnedModel};
use kinglet_runtime::unstable::wire::format::{Precision, MAX_LAYERS};

use crate::graph::FloatModel;

/// A width as the format's `u32`.
pub(crate) fn wire_u32(v: usize, what: &str) -> Result<u32> {
    u32::try_from(v).map_err(|_| anyhow!("{what} {v} is too large for the format"))
}

/// The table of `model` with `layers` (already in wire form) in `precision`.
pub(crate) fn owned_table(
    model: &FloatModel,
    precision: Precision,
    input_quant: Option<OwnedInput>,
    layers: Vec<OwnedLayer>,
) -> Result<OwnedModel> {
    if layers.len() > MAX_LAYERS {
        return Err(BuildError::TooManyLayers(layers.len()).into());
    }
    if let Some(bad) = model.labels.iter().find(|l| l.contains('\n')) {
        bail!("class label {bad:?} contains a line break");
    }
    Ok(OwnedModel {
        input_len: wire_u32(model.input_len, "input width")?,
        precision,
        scaler: model
            .scaler
            .as_ref()
            .map(|s| (f32s(&s.offset), f32s(&s.scale))),
        input_quant,
        layers,
        output: model.output,
        labels: model.labels.join("\n"),
    })
}

/// A float layer's activation in the wire form of an f32 layer: the pointwise kind with its
/// parameters (an int8 layer's table is made by [`crate::quantise`]).
pub(crate) fn builder_activation(a: &crate::graph::Activation) -> kinglet_builder::Activation {
    use crate::graph::Activation as A;
    match a {
        A::Linear => kinglet_builder::Activation::Linear,
        A::Relu => kinglet_builder::Activation::Relu,
        A::Pointwise(p) => kinglet_builder::Activation::Pointwise {
            kind: p.kind as u8,
            input_zero_point: 0,
            data: f32s(p.params.get(..p.kind.params()).unwrap_or(&[])),
        },
    }
}
