//! Weight order in the blob: the packer writes every layer in the runtime's `Blocked4x4`
//! layout (4-row blocks, int8 excess-128, data 4-byte aligned within the blob; `FORMAT.md`
//! §3.1), the order the Cortex-M kernels read. The geometry is the runtime's own
//! (`kinglet_runtime::dense::layout`), so writer and reader cannot disagree.
use anyhow::{anyhow, bail, Result};
use kinglet_runtime::dense::layout;
use kinglet_runtime::format::{Precision, WeightLayout};
use kinglet_runtime::Model;

/// The weight data (no alignment bytes) of one layer in `target`, from output-major bytes.
pub fn reorder(
    precision: Precision,
    inputs: usize,
    outputs: usize,
    om: &[u8],
    target: WeightLayout,
) -> Result<Vec<u8>> {
    match target {
        WeightLayout::OutputMajor => Ok(om.to_vec()),
        WeightLayout::Blocked4x4 => {
            let mut out =
                vec![0u8; layout::elements(inputs, outputs) * precision.activation_bytes()];
            let ok = match precision {
                Precision::Int8 => {
                    let w: Vec<i8> = om.iter().map(|&b| b as i8).collect();
                    layout::block_i8(inputs, outputs, &w, &mut out)
                }
                Precision::F32 => {
                    let w: Vec<f32> = om
                        .chunks_exact(4)
                        .map(|c| f32::from_le_bytes([c[0], c[1], c[2], c[3]]))
                        .collect();
                    layout::block_f32(inputs, outputs, &w, &mut out)
                }
            };
            if !ok {
                bail!(
                    "internal: {} weight bytes for a {inputs} → {outputs} layer",
                    om.len()
                );
            }
            Ok(out)
        }
    }
}

/// Encodes with `encode(fields)` (one weight field per layer), putting in front of each blocked
/// layer's `data` the alignment bytes that make it start at a multiple of 4 in the blob.
/// Earlier pads shift later layers, so this re-encodes until the pads settle (a few rounds).
pub fn encode_aligned(
    data: &[Vec<u8>],
    blocked: &[bool],
    encode: impl Fn(&[Vec<u8>]) -> Result<Vec<u8>>,
) -> Result<Vec<u8>> {
    let mut pads = vec![0usize; data.len()];
    for _ in 0..=2 * data.len() + 2 {
        let fields: Vec<Vec<u8>> = data
            .iter()
            .zip(&pads)
            .map(|(d, &p)| [vec![0u8; p], d.clone()].concat())
            .collect();
        let blob = encode(&fields)?;
        let wanted: Vec<usize> = {
            let model =
                Model::parse(&blob).map_err(|e| anyhow!("internal: packed blob rejected: {e}"))?;
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
    bail!("internal: weight alignment did not settle")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn blocked_int8_hand_worked() {
        // 2 × 3 (outputs × inputs), one padded 4 × 4 block; 0x80 is a zero weight.
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
    }
}
