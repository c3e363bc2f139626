//! Loading the float side of a comparison: an `.onnx` or `.json` model packed to f32 in memory,
//! or an f32 `.kgl` blob as it is.
use anyhow::{bail, Context, Result};
use kinglet_runtime::unstable::wire::format::ScalerDesc;
use kinglet_runtime::{Model, Precision};
use std::path::Path;

use crate::graph::{Scaler, ScalerKind};
use crate::import::import_file;
use crate::pack::pack_f32;

/// The float model's f32 blob and what was done to get it.
#[derive(Debug, Clone)]
pub struct FloatBlob {
    /// The f32 blob.
    pub blob: Vec<u8>,
    /// Remarks for the report.
    pub notes: Vec<String>,
}

/// The scaler as one `(offset, scale)` pair per input, so a length-1 scaler and its expansion
/// compare equal.
fn expand(offset: &[f32], scale: &[f32], width: usize) -> Vec<(u32, u32)> {
    (0..width)
        .map(|i| {
            let o = offset.get(i).or(offset.first()).copied().unwrap_or(0.0);
            let s = scale.get(i).or(scale.first()).copied().unwrap_or(1.0);
            (o.to_bits(), s.to_bits())
        })
        .collect()
}

fn floats(bytes: &[u8]) -> Vec<f32> {
    bytes
        .chunks_exact(4)
        .filter_map(|c| <[u8; 4]>::try_from(c).ok().map(f32::from_le_bytes))
        .collect()
}

fn desc_scaler(d: Option<ScalerDesc<'_>>) -> Option<(Vec<f32>, Vec<f32>)> {
    d.map(|s| (floats(s.offset), floats(s.scale)))
}

const DIFFERENT_SCALERS: &str = "the float model and the int8 blob scale their inputs differently; were both packed from the same model with the same --scaler / --divide-by?";

/// What differs first when the two sides cannot be the same model, before their scalers are
/// compared (a scaler comparison over different widths would only say "scale differently").
fn check_sides(float_width: usize, int8: &Model<'_>) -> Result<()> {
    if int8.precision() != Precision::Int8 {
        bail!("the second model is an f32 blob; give the int8 blob (made by `kinglet pack --calibration ...`)");
    }
    if float_width != int8.input_len() {
        bail!(
            "the models take different inputs: float {float_width} features, int8 {}",
            int8.input_len()
        );
    }
    Ok(())
}

/// Loads the float model at `path` for comparison with `int8`.
///
/// `.onnx` and `.json` models are imported and packed to f32 in memory. When such a model
/// carries no scaler but the int8 blob does (it was packed with `--scaler` or `--divide-by`),
/// the blob's saved scaler is used, with a note. Any other file is read as an f32 blob.
pub fn load_float(path: &Path, int8: &Model<'_>) -> Result<FloatBlob> {
    let ext = path
        .extension()
        .and_then(|e| e.to_str())
        .map(str::to_ascii_lowercase);
    let width = int8.input_len();
    let blob_scaler = desc_scaler(int8.desc().scaler);
    let mut notes = Vec::new();
    if matches!(ext.as_deref(), Some("onnx" | "json")) {
        let mut model =
            import_file(path).with_context(|| format!("cannot import {}", path.display()))?;
        check_sides(model.input_len, int8)?;
        match (&model.scaler, &blob_scaler) {
            (None, Some((offset, scale))) => {
                model.scaler = Some(Scaler {
                    kind: ScalerKind::Affine,
                    offset: offset.clone(),
                    scale: scale.clone(),
                });
                notes.push(format!(
                    "{} carries no input scaler; the int8 blob's saved scaler is applied to the float model too",
                    path.display()
                ));
            }
            (Some(s), Some((offset, scale))) => {
                if expand(&s.offset, &s.scale, width) != expand(offset, scale, width) {
                    bail!("{DIFFERENT_SCALERS}");
                }
            }
            (Some(_), None) => {
                bail!("{DIFFERENT_SCALERS} (the float model has a scaler, the int8 blob none)")
            }
            (None, None) => {}
        }
        let blob =
            pack_f32(&model).with_context(|| format!("cannot pack {} to f32", path.display()))?;
        return Ok(FloatBlob { blob, notes });
    }
    let blob = std::fs::read(path).with_context(|| format!("cannot read {}", path.display()))?;
    let m = Model::parse(&blob)
        .map_err(|e| anyhow::anyhow!("{}: not a valid model blob: {e}", path.display()))?;
    if m.precision() != Precision::F32 {
        bail!("the float model is an int8 blob; give the float model (.onnx, .json or an f32 .kgl) first and the int8 blob second");
    }
    check_sides(m.input_len(), int8)?;
    let ours = desc_scaler(m.desc().scaler);
    let same = match (&ours, &blob_scaler) {
        (None, None) => true,
        (Some((o1, s1)), Some((o2, s2))) => expand(o1, s1, width) == expand(o2, s2, width),
        _ => false,
    };
    if !same {
        bail!("{DIFFERENT_SCALERS}");
    }
    drop(m);
    Ok(FloatBlob { blob, notes })
}
