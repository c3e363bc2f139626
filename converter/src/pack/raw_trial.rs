//! The raw-input trial of an int8 pack ([`super::Int8Options::fold_scaler`]): the model with its
//! scaler folded into the first layer and the raw integer input quantised exactly
//! ([`crate::quantise::raw_input`]), measured against the scaled pack on the calibration rows.
use anyhow::{anyhow, Result};
use kinglet_runtime::Model;

use super::FoldScaler;
use crate::dataset::Dataset;
use crate::graph::FloatModel;
use crate::quantise::calibrate::{element_means, Calibration, TensorRange};
use crate::quantise::raw_input::{exact_integer_range, fold_scaler};
use crate::vet::{self, Criteria, ModelPair, Parallelism, Sources};

/// Which input the pack kept, when it tried both ([`super::Int8Options::fold_scaler`]).
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct RawInputChoice {
    /// `folded` (raw integers, the scaler in the first layer) or `scaled` (the scaler in the
    /// blob), or `scaled` with `reason` when folding did not apply.
    pub kept: &'static str,
    /// Why folding was not tried, if it was not.
    pub reason: Option<String>,
    /// SQNR of the last layer's output on the calibration rows, scaled input (dB).
    pub scaled_sqnr_db: Option<f64>,
    /// The same with the raw input and the folded scaler (dB).
    pub folded_sqnr_db: Option<f64>,
}

/// Builds an int8 blob of a model from its tensor ranges and layer-input means.
pub type Build<'a> = dyn Fn(&FloatModel, &[TensorRange], &[Vec<f64>]) -> Result<Vec<u8>> + 'a;

/// Tries the folded pack of `model` calibrated as `cal` on `data`; `scaled` is the plain pack.
/// Returns what it found and, when the folded blob is to be kept, that blob. A folded model
/// that cannot be quantised keeps the scaled one, with the reason.
pub fn try_folded(
    model: &FloatModel,
    float: &Model<'_>,
    data: &Dataset,
    cal: &Calibration,
    scaled: &[u8],
    how: FoldScaler,
    build: &Build<'_>,
) -> Result<(RawInputChoice, Option<Vec<u8>>)> {
    let Some(folded) = fold_scaler(model) else {
        return Ok((not_folded("the model has no scaler to fold".into()), None));
    };
    let Some(r0) = exact_integer_range(data) else {
        let why = "the calibration rows are not all whole numbers that an int8 step of 2^-k (k ≥ 0) holds exactly";
        return Ok((not_folded(why.into()), None));
    };
    let mut ranges = cal.ranges.clone();
    let mut means = cal.means.clone();
    if let (Some(r), Some(m)) = (ranges.first_mut(), means.first_mut()) {
        *r = r0;
        *m = element_means(&data.features, data.width);
    }
    let blob = match build(&folded, &ranges, &means) {
        Ok(b) => b,
        Err(e) => {
            let why = format!(
                "the folded model cannot be quantised: {}",
                crate::error_line::one_line(e.as_ref())
            );
            return Ok((not_folded(why), None));
        }
    };
    if how != FoldScaler::Try {
        let choice = RawInputChoice {
            kept: "folded",
            reason: None,
            scaled_sqnr_db: None,
            folded_sqnr_db: None,
        };
        return Ok((choice, Some(blob)));
    }
    let scaled_sqnr_db = output_sqnr(float, scaled, data)?;
    let folded_sqnr_db = output_sqnr(float, &blob, data)?;
    // No noise at all (`None`) beats any finite SQNR.
    let better = folded_sqnr_db.unwrap_or(f64::INFINITY) > scaled_sqnr_db.unwrap_or(f64::INFINITY);
    let choice = RawInputChoice {
        kept: if better { "folded" } else { "scaled" },
        reason: None,
        scaled_sqnr_db,
        folded_sqnr_db,
    };
    Ok((choice, better.then_some(blob)))
}

fn not_folded(reason: String) -> RawInputChoice {
    RawInputChoice {
        kept: "scaled",
        reason: Some(reason),
        scaled_sqnr_db: None,
        folded_sqnr_db: None,
    }
}

/// The SQNR of the last layer's output of int8 `blob` against `float` on `data` (vet's sums).
fn output_sqnr(float: &Model<'_>, blob: &[u8], data: &Dataset) -> Result<Option<f64>> {
    let int8 = Model::parse(blob).map_err(|e| anyhow!("internal: int8 pack rejected: {e}"))?;
    let pair = ModelPair::new(float.clone(), int8)?;
    let r = vet::vet(
        &pair,
        data,
        &Sources::default(),
        &Criteria::default(),
        Parallelism::Parallel,
        &|_| {},
    )?;
    Ok(r.fidelity.last().and_then(|f| f.sqnr_db))
}
