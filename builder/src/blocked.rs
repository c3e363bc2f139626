//! Weights between the layouts of `FORMAT.md` §3.1 and §3.5, and encoding with the
//! `Blocked4x4` and `Nibble4x4` data aligned. The geometry is the runtime's own (`kinglet_runtime::unstable::wire::layout`), so writer and
//! reader cannot disagree.
use kinglet_runtime::unstable::wire::format::{Precision, WeightLayout};
use kinglet_runtime::unstable::wire::{layout, nibble};
use kinglet_runtime::Model;

use crate::error::BuildError;
use crate::owned::OwnedLayer;

/// The weight data (no alignment bytes) of layer `l` in `target`, from the layout it has.
pub fn weights_in(
    precision: Precision,
    l: &OwnedLayer,
    target: WeightLayout,
) -> Result<Vec<u8>, BuildError> {
    let om = match l.layout {
        WeightLayout::OutputMajor => l.weights.clone(),
        WeightLayout::Blocked4x4 => output_major(precision, l)?,
        WeightLayout::Nibble4x4 => output_major_i4(l)?,
    };
    reorder(precision, l.inputs, l.outputs, &om, target)
}

/// The weight data (no alignment bytes) of one layer in `target`, from output-major bytes.
pub fn reorder(
    precision: Precision,
    inputs: u32,
    outputs: u32,
    om: &[u8],
    target: WeightLayout,
) -> Result<Vec<u8>, BuildError> {
    let (n, m) = (inputs as usize, outputs as usize);
    match target {
        WeightLayout::OutputMajor => Ok(om.to_vec()),
        WeightLayout::Blocked4x4 => {
            let mut out = vec![0u8; layout::elements(n, m) * precision.activation_bytes()];
            let ok = match precision {
                Precision::Int8 => {
                    let w: Vec<i8> = om.iter().map(|&b| b as i8).collect();
                    layout::block_i8(n, m, &w, &mut out)
                }
                Precision::F32 => {
                    let w: Vec<f32> = om
                        .chunks_exact(4)
                        .map(|c| f32::from_le_bytes([c[0], c[1], c[2], c[3]]))
                        .collect();
                    layout::block_f32(n, m, &w, &mut out)
                }
            };
            if !ok {
                return Err(BuildError::WeightBytes {
                    bytes: om.len(),
                    inputs,
                    outputs,
                });
            }
            Ok(out)
        }
        // int4: the int8 values must already be in [-8, 7] (the converter quantises them so).
        WeightLayout::Nibble4x4 => {
            let mut out = vec![0u8; nibble::bytes(n, m)];
            let w: Vec<i8> = om.iter().map(|&b| b as i8).collect();
            if precision != Precision::Int8 || !nibble::pack(n, m, &w, &mut out) {
                return Err(BuildError::WeightBytes {
                    bytes: om.len(),
                    inputs,
                    outputs,
                });
            }
            Ok(out)
        }
    }
}

/// The output-major int8 bytes of a `Nibble4x4` layer's int4 weights.
fn output_major_i4(l: &OwnedLayer) -> Result<Vec<u8>, BuildError> {
    let (n, m) = (l.inputs as usize, l.outputs as usize);
    let bad = BuildError::WeightBytes {
        bytes: l.weights.len(),
        inputs: l.inputs,
        outputs: l.outputs,
    };
    let (_, data) = nibble::split(&l.weights, n, m).ok_or(bad)?;
    let mut om = Vec::with_capacity(n * m);
    for o in 0..m {
        for i in 0..n {
            om.push(nibble::get(data, o, i, n).unwrap_or(0) as u8);
        }
    }
    Ok(om)
}

/// The output-major weights of a `Blocked4x4` layer (its alignment bytes and padding dropped).
fn output_major(precision: Precision, l: &OwnedLayer) -> Result<Vec<u8>, BuildError> {
    let (n, m) = (l.inputs as usize, l.outputs as usize);
    let elem = precision.activation_bytes();
    let bad = BuildError::WeightBytes {
        bytes: l.weights.len(),
        inputs: l.inputs,
        outputs: l.outputs,
    };
    let (_, data) = layout::split(&l.weights, n, m, elem).ok_or(bad)?;
    let mut om = Vec::with_capacity(n * m * elem);
    for o in 0..m {
        for i in 0..n {
            let at = layout::index(o, i, n) * elem;
            let e = &data[at..at + elem];
            if precision == Precision::Int8 {
                om.push(layout::decode_i8(e[0]) as u8);
            } else {
                om.extend_from_slice(e);
            }
        }
    }
    Ok(om)
}

/// Encodes with `encode(fields)` (one weight field per layer), putting in front of each blocked
/// layer's `data` the alignment bytes that make it start at a multiple of 4 in the blob.
/// Earlier pads shift later layers, so this re-encodes until the pads settle (a few rounds).
pub fn encode_aligned(
    data: &[Vec<u8>],
    blocked: &[bool],
    encode: impl Fn(&[Vec<u8>]) -> Result<Vec<u8>, BuildError>,
) -> Result<Vec<u8>, BuildError> {
    let mut pads = vec![0usize; data.len()];
    for _ in 0..=2 * data.len() + 2 {
        let fields: Vec<Vec<u8>> = data
            .iter()
            .zip(&pads)
            .map(|(d, &p)| [vec![0u8; p], d.clone()].concat())
            .collect();
        let blob = encode(&fields)?;
        let wanted: Vec<usize> = {
            let model = Model::parse(&blob).map_err(BuildError::Rejected)?;
            let w = layout::wanted_pads(&model, &blob);
            blocked
                .iter()
                .zip(w.iter())
                .map(|(&b, p)| if b { p.unwrap_or(0) } else { 0 })
                .collect()
        };
        if wanted == pads {
            return Ok(blob);
        }
        pads = wanted;
    }
    Err(BuildError::Unsettled)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::Activation;

    #[test]
    fn blocked_int8_hand_worked() {
        // FORMAT.md §3.1's example: 2 × 3 (outputs × inputs), one padded 4 × 4 block; 0x80 is a
        // zero weight.
        let om = [1i8, 2, 3, -1, -2, -128].map(|v| v as u8);
        let b = reorder(Precision::Int8, 3, 2, &om, WeightLayout::Blocked4x4).unwrap();
        assert_eq!(
            b,
            vec![129, 130, 131, 128, 127, 126, 0, 128, 128, 128, 128, 128, 128, 128, 128, 128]
        );
        assert_eq!(
            reorder(Precision::Int8, 3, 2, &om, WeightLayout::OutputMajor).unwrap(),
            om.to_vec()
        );
        assert!(reorder(Precision::Int8, 3, 3, &om, WeightLayout::Blocked4x4).is_err());
        // And back, behind two alignment bytes.
        let mut l = OwnedLayer::int8(
            3,
            2,
            Activation::Linear,
            &[0; 6],
            &[0; 2],
            crate::OwnedQuant::new(&[1.0; 2], &[1 << 30; 2], &[0; 2], 1.0, 0),
        );
        l.layout = WeightLayout::Blocked4x4;
        l.weights = [vec![0, 0], b].concat();
        assert_eq!(
            weights_in(Precision::Int8, &l, WeightLayout::OutputMajor).unwrap(),
            om.to_vec()
        );
    }

    #[test]
    fn blocked_f32_is_aligned_and_converts_back() {
        let m = crate::sample::tiny_f32();
        let blob = m.encode_in(WeightLayout::Blocked4x4).unwrap();
        let parsed = Model::parse(&blob).unwrap();
        for l in parsed.layers() {
            let d = l.desc;
            let data = layout::elements(d.inputs as usize, d.outputs as usize) * 4;
            let at = d.weights.as_ptr() as usize - blob.as_ptr() as usize + d.weights.len() - data;
            assert_eq!((d.layout, at % 4), (WeightLayout::Blocked4x4, 0));
        }
        let back = crate::OwnedModel::from_desc(parsed.desc());
        assert_eq!(
            back.encode_in(WeightLayout::OutputMajor).unwrap(),
            m.encode_to_vec().unwrap()
        );
    }
}
