//! One candidate assignment of weight precisions: packed, vetted on the held-out rows, and
//! judged against the bound.
use anyhow::{anyhow, Context, Result};
use kinglet_runtime::Model;

use crate::dataset::Dataset;
use crate::graph::FloatModel;
use crate::pack::{pack_int8_with, Int8Options};
use crate::quantise::weight_bits::{LayerBits, WeightBits};
use crate::score::feed::{Entry, Rows};
use crate::vet::{self, Criteria, How, ModelPair, Sources};

/// Why a candidate is in the table.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Role {
    /// Every layer int8.
    AllInt8,
    /// Every layer int4.
    AllInt4,
    /// One layer int4, the rest int8: that layer's sensitivity.
    Sensitivity,
    /// A greedy step: the previous step's assignment with one more layer in int4.
    Step,
    /// Another assignment of the exhaustive search.
    Other,
}

impl Role {
    /// A short description for the table.
    pub fn text(self) -> &'static str {
        match self {
            Role::AllInt8 => "all int8",
            Role::AllInt4 => "all int4",
            Role::Sensitivity => "one layer int4",
            Role::Step => "greedy step",
            Role::Other => "exhaustive",
        }
    }
}

/// A packed and vetted candidate.
#[derive(Debug, Clone, serde::Serialize)]
pub struct Candidate {
    /// Why it was evaluated.
    pub role: Role,
    /// Weight precision per layer, in layer order.
    #[serde(serialize_with = "names")]
    pub weights: Vec<WeightBits>,
    /// Bytes of the blob (its flash footprint).
    pub bytes: usize,
    /// Held-out rows.
    pub rows: u64,
    /// Rows the float model predicts right (when the rows have labels).
    pub float_correct: Option<u64>,
    /// Rows this candidate predicts right (when the rows have labels).
    pub int8_correct: Option<u64>,
    /// Float accuracy minus this candidate's, in percentage points.
    pub drop_pp: Option<f64>,
    /// The drop's 95% interval, percentage points (Newcombe 1998, as `vet`).
    pub drop_interval_pp: Option<(f64, f64)>,
    /// Rows where the candidate and the float model give the same class.
    pub agree: u64,
    /// `agree / rows`, in percent.
    pub agreement_pct: f64,
    /// Whether every criterion of the bound holds (as `vet`'s verdict).
    pub meets: bool,
    /// How far the candidate is from the bound: 0 when it meets it, else the largest excess
    /// over a limit, in percentage points (drop) or percent of rows (agreement).
    pub shortfall: f64,
    /// The blob (not serialised).
    #[serde(skip)]
    pub blob: Vec<u8>,
    /// The class this candidate gives each held-out row (not serialised).
    #[serde(skip)]
    pub classes: Vec<usize>,
}

fn names<S: serde::Serializer>(w: &[WeightBits], s: S) -> Result<S::Ok, S::Error> {
    s.collect_seq(w.iter().map(|b| b.name()))
}

impl Candidate {
    /// The weight precisions as one word per layer, e.g. `int4 int8`.
    pub fn label(&self) -> String {
        self.weights
            .iter()
            .map(|b| b.name())
            .collect::<Vec<_>>()
            .join(" ")
    }

    /// Layers with int4 weights.
    pub fn int4_layers(&self) -> usize {
        self.weights
            .iter()
            .filter(|&&b| b == WeightBits::Int4)
            .count()
    }
}

/// The per-layer precisions as [`LayerBits`].
pub fn layer_bits(weights: &[WeightBits]) -> LayerBits {
    let mut bits = LayerBits::default();
    for (k, &b) in weights.iter().enumerate() {
        bits.set(k, b);
    }
    bits
}

/// What stays the same for every candidate.
pub struct Fixed<'a> {
    /// The float model (scaler and labels attached).
    pub model: &'a FloatModel,
    /// Its f32 blob, the reference of every comparison.
    pub float_blob: &'a [u8],
    /// Calibration rows.
    pub calibration: &'a Dataset,
    /// Calibration options (the weights are set per candidate).
    pub options: Int8Options,
    /// Held-out rows, as the firmware feeds them.
    pub heldout: &'a Rows,
    /// The bound, as `vet`'s criteria.
    pub criteria: &'a Criteria,
    /// Threads, and batched or row by row (`vet`'s engines).
    pub how: How,
}

/// Packs and vets one assignment.
pub fn evaluate(cx: &Fixed<'_>, role: Role, weights: Vec<WeightBits>) -> Result<Candidate> {
    let options = Int8Options {
        weights: layer_bits(&weights),
        ..cx.options
    };
    let label = weights
        .iter()
        .map(|b| b.name())
        .collect::<Vec<_>>()
        .join(" ");
    let packed = pack_int8_with(cx.model, cx.calibration, options)
        .with_context(|| format!("cannot pack the candidate {label}"))?;
    let float = Model::parse(cx.float_blob).map_err(|e| anyhow!("internal: f32 blob: {e}"))?;
    let int8 = Model::parse(&packed.blob).map_err(|e| anyhow!("internal: {label}: {e}"))?;
    let pair = ModelPair::new(float, int8)?;
    let report = vet::vet_rows(
        &pair,
        cx.heldout,
        Entry::Infer,
        &Sources::default(),
        cx.criteria,
        cx.how,
        &|_| {},
    )?;
    drop(pair);
    let acc = report.accuracy.as_ref();
    let drop_pp = acc.map(|a| a.drop_pp);
    let interval = acc.map(|a| (a.drop_interval_pp.lower, a.drop_interval_pp.upper));
    let agreement_pct = 100.0 * report.agreement.rate;
    let shortfall = shortfall(cx.criteria, drop_pp, interval, agreement_pct);
    Ok(Candidate {
        role,
        weights,
        bytes: packed.blob.len(),
        rows: report.agreement.rows,
        float_correct: acc.map(|a| a.float.correct),
        int8_correct: acc.map(|a| a.int8.correct),
        drop_pp,
        drop_interval_pp: interval,
        agree: report.agreement.agree,
        agreement_pct,
        meets: report.passed(),
        shortfall,
        blob: packed.blob,
        classes: report.predictions.int8,
    })
}

/// The largest excess over a limit of `criteria` (0 when every one holds).
fn shortfall(
    criteria: &Criteria,
    drop_pp: Option<f64>,
    interval: Option<(f64, f64)>,
    agreement_pct: f64,
) -> f64 {
    let mut worst = 0f64;
    if let (Some(limit), Some(drop)) = (criteria.max_drop_pp, drop_pp) {
        let value = match criteria.gate {
            Some(vet::Gate::UpperLimit) => interval.map_or(drop, |i| i.1),
            _ => drop,
        };
        worst = worst.max(value - limit);
    }
    if let Some(min) = criteria.min_agreement_pct {
        worst = worst.max(min - agreement_pct);
    }
    worst
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn shortfall_is_the_largest_excess() {
        let c = Criteria {
            max_drop_pp: Some(1.0),
            gate: Some(vet::Gate::UpperLimit),
            min_agreement_pct: Some(99.0),
            ..Criteria::default()
        };
        // Upper limit 2.5 pp against 1: 1.5 over; agreement 98.8 % against 99: 0.2 under.
        let s = shortfall(&c, Some(0.4), Some((-0.3, 2.5)), 98.8);
        assert!((s - 1.5).abs() < 1e-12);
        // Both within: 0.
        assert_eq!(shortfall(&c, Some(0.0), Some((-0.5, 0.9)), 99.5), 0.0);
        // The estimate gate reads the drop itself.
        let e = Criteria {
            gate: Some(vet::Gate::Estimate),
            ..c.clone()
        };
        assert!((shortfall(&e, Some(1.25), Some((0.0, 3.0)), 100.0) - 0.25).abs() < 1e-12);
    }

    #[test]
    fn layer_bits_names_each_layer() {
        let b = layer_bits(&[WeightBits::Int4, WeightBits::Int8, WeightBits::Int4]);
        assert_eq!(b.get(0), WeightBits::Int4);
        assert_eq!(b.get(1), WeightBits::Int8);
        assert_eq!(b.get(2), WeightBits::Int4);
        assert!(b.check_layers(3).is_ok());
        assert!(b.check_layers(2).is_err());
    }
}
