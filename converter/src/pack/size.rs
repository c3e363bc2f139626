//! How big a blob must be, and the weight layouts that keep it there (`runtime/FORMAT.md`
//! §3.4): the essential bytes of a table, and the size goal every pack meets,
//! `essential + kept optional sections + 5 % + 128 bytes` (a project goal, issue 16; no outside
//! source).
use anyhow::Result;
use kinglet_builder::OwnedModel;
use kinglet_runtime::unstable::wire::format::{ModelDesc, Precision, WeightLayout};
use kinglet_runtime::unstable::wire::header::HEADER_LEN;
use kinglet_runtime::unstable::wire::layout;
use kinglet_runtime::Model;

/// The essential bytes of the blob `desc` was decoded from, `blob_len` long: the header, the
/// table's framing (the body bytes that are no tensor or label payload), the labels, the
/// scaler once, and per layer the weights, biases and (int8) multipliers and shifts, from the
/// shapes (int4 weights `⌈inputs / 2⌉ · outputs` bytes). Optional sections and Blocked4x4 or
/// Nibble4x4 padding are not essential.
pub fn essential_bytes(desc: &ModelDesc<'_>, blob_len: usize) -> usize {
    let int8 = desc.precision == Precision::Int8;
    let elem = desc.precision.activation_bytes();
    let mut payload = desc.labels.len();
    let mut needed = desc.labels.len();
    if let Some(s) = &desc.scaler {
        payload += s.offset.len() + s.scale.len();
        needed += s.offset.len() + s.scale.len();
    }
    if let Some(q) = &desc.input_quant {
        payload += q.int_mult.len() + q.int_add.len() + q.int_shift.len();
    }
    for l in &desc.layers {
        let (i, o) = (l.inputs as usize, l.outputs as usize);
        payload += l.weights.len() + l.bias.len();
        // int4 weights: two per byte, a row's odd last one in a byte of its own.
        needed += match l.layout {
            WeightLayout::Nibble4x4 => i.div_ceil(2) * o,
            _ => i * o * elem,
        } + 4 * o;
        if let Some(q) = &l.quant {
            payload += q.weight_scale.len() + q.multiplier.len() + q.shift.len();
        }
        if int8 {
            needed += 5 * o;
        }
    }
    let framing = blob_len.saturating_sub(HEADER_LEN + payload);
    HEADER_LEN + framing + needed
}

/// Bytes of the optional sections (§3.4) `desc` keeps.
pub fn optional_bytes(desc: &ModelDesc<'_>) -> usize {
    let integer = desc.input_quant.as_ref().map_or(0, |q| {
        q.int_mult.len() + q.int_add.len() + q.int_shift.len()
    });
    let scales: usize = desc
        .layers
        .iter()
        .filter_map(|l| l.quant.as_ref())
        .map(|q| q.weight_scale.len())
        .sum();
    integer + scales
}

/// The most bytes `blob` may take: its essential bytes and kept optional sections, + 5 % of
/// the essential bytes + 128.
pub fn size_limit(blob: &[u8]) -> Result<usize> {
    let m =
        Model::parse(blob).map_err(|e| anyhow::anyhow!("internal: packed blob rejected: {e}"))?;
    let e = essential_bytes(m.desc(), blob.len());
    Ok(e + optional_bytes(m.desc()) + e / 20 + 128)
}

/// Padding bytes a layer `inputs → outputs` of `elem`-byte weights takes in Blocked4x4.
fn blocked_padding(inputs: u32, outputs: u32, elem: usize) -> usize {
    let (i, o) = (inputs as usize, outputs as usize);
    (layout::elements(i, o) - i * o) * elem
}

/// `table` encoded with every layer in Blocked4x4 (the layout the Cortex-M kernels read
/// fastest), unless its padding takes the blob past [`size_limit`]: then the layers with the
/// most padding are written OutputMajor, most first, until it fits (a 1-output layer is 4 rows
/// of which 3 are padding; a 784 → 10 layer wastes two rows of 784). int4 layers stay
/// Nibble4x4, their only layout.
pub fn encode_within_limit(table: &OwnedModel) -> Result<Vec<u8>> {
    let elem = table.precision.activation_bytes();
    let int4 = |l: &kinglet_builder::OwnedLayer| l.layout == WeightLayout::Nibble4x4;
    // int4 layers have one layout, Nibble4x4 (FORMAT.md §3.5), and keep it.
    let mut layouts: Vec<WeightLayout> = table
        .layers
        .iter()
        .map(|l| {
            if int4(l) {
                l.layout
            } else {
                WeightLayout::Blocked4x4
            }
        })
        .collect();
    let mut blob = table.encode_layouts(&layouts)?;
    let mut order: Vec<(usize, usize)> = table
        .layers
        .iter()
        .map(|l| {
            if int4(l) {
                0
            } else {
                blocked_padding(l.inputs, l.outputs, elem)
            }
        })
        .enumerate()
        .filter(|&(_, pad)| pad > 0)
        .collect();
    order.sort_by_key(|&(k, pad)| (std::cmp::Reverse(pad), k));
    for (k, _) in order {
        if blob.len() <= size_limit(&blob)? {
            break;
        }
        if let Some(l) = layouts.get_mut(k) {
            *l = WeightLayout::OutputMajor;
        }
        blob = table.encode_layouts(&layouts)?;
    }
    Ok(blob)
}

#[cfg(test)]
mod tests {
    use super::*;
    use kinglet_builder::sample::tiny_int8;
    use kinglet_builder::Activation;
    use kinglet_builder::OwnedLayer;
    use kinglet_runtime::unstable::wire::format::OutputKind;

    #[test]
    fn essential_bytes_of_the_small_model_by_hand() {
        // tiny_int8: 3 → 4 → 2, uniform scaler (8 B), labels "off\non" (6 B); weights 12 + 8,
        // biases 16 + 8, multipliers 16 + 8, shifts 4 + 2.
        let m = tiny_int8();
        let blob = m.encode_to_vec().unwrap();
        let p = Model::parse(&blob).unwrap();
        let tensors = 8 + 6 + 20 + 24 + 24 + 6;
        // Every other body byte is framing: the blob less its tensors, labels and the 13 B of
        // integer tables and 24 B of weight scales.
        let framing = blob.len() - HEADER_LEN - tensors - 13 - 24;
        assert_eq!(
            essential_bytes(p.desc(), blob.len()),
            HEADER_LEN + framing + tensors
        );
        assert_eq!(optional_bytes(p.desc()), 13 + 24);
    }

    #[test]
    fn a_one_output_layer_is_written_output_major_when_padding_would_break_the_goal() {
        // 200 → 1 f32: Blocked4x4 holds 4 × 200 weights (2,400 B of padding), output-major 200.
        let w: Vec<f32> = (0..200).map(|i| i as f32 / 200.0).collect();
        let table = OwnedModel {
            input_len: 200,
            precision: Precision::F32,
            scaler: None,
            input_quant: None,
            layers: vec![OwnedLayer::f32(200, 1, Activation::Linear, &w, &[0.5])],
            output: OutputKind::Sigmoid,
            labels: String::new(),
        };
        let blob = encode_within_limit(&table).unwrap();
        let p = Model::parse(&blob).unwrap();
        assert_eq!(p.desc().layers[0].layout, WeightLayout::OutputMajor);
        assert!(blob.len() <= size_limit(&blob).unwrap());
        // 200 → 8 has no padding: Blocked4x4.
        let w: Vec<f32> = (0..1600).map(|i| i as f32 / 1600.0).collect();
        let table = OwnedModel {
            layers: vec![OwnedLayer::f32(200, 8, Activation::Linear, &w, &[0.0; 8])],
            output: OutputKind::Softmax,
            ..table
        };
        let blob = encode_within_limit(&table).unwrap();
        let p = Model::parse(&blob).unwrap();
        assert_eq!(p.desc().layers[0].layout, WeightLayout::Blocked4x4);
    }
}
