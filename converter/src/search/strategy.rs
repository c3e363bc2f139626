//! The search: which assignments are evaluated, and which one is picked.
use anyhow::{bail, Result};

use super::candidate::{evaluate, Candidate, Fixed, Role};
use super::WeightBits;
use crate::dataset::Dataset;
use crate::graph::FloatModel;
use crate::pack::{pack_f32, Int8Options};
use crate::score::feed::Rows;
use crate::vet::{Criteria, How};

/// Models with at most this many layers are searched exhaustively (2^4 = 16 candidates);
/// deeper ones greedily.
pub const EXHAUSTIVE_LAYERS: usize = 4;

/// How the assignments were searched.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Method {
    /// Every assignment: the pick is the smallest one that meets the bound.
    Exhaustive,
    /// Layers into int4 one at a time, least sensitive per byte saved first, each step kept
    /// only if the bound holds: `L` sensitivities and at most `L` steps instead of `2^L`
    /// candidates, and it may miss a smaller assignment that meets the bound.
    Greedy,
}

/// What the search needs.
pub struct SearchInput<'a> {
    /// The float model (scaler and labels attached).
    pub model: &'a FloatModel,
    /// Calibration rows (not the held-out rows).
    pub calibration: &'a Dataset,
    /// Calibration options; the weights are chosen per candidate.
    pub options: Int8Options,
    /// Held-out rows, labelled or not, as the firmware feeds them.
    pub heldout: &'a Rows,
    /// The bound, as `vet`'s criteria (`max_drop_pp` with `gate`, `min_agreement_pct`).
    pub criteria: Criteria,
    /// Largest blob, in bytes, if the board sets one.
    pub flash_budget: Option<u64>,
    /// How `vet` runs the rows: batched (fast) or row by row (the float sums in the same order
    /// on every CPU).
    pub how: How,
}

/// The outcome.
#[derive(Debug, Clone, serde::Serialize)]
pub struct Search {
    /// How the assignments were searched.
    pub method: Method,
    /// Every evaluated candidate, in evaluation order.
    pub candidates: Vec<Candidate>,
    /// Index of the smallest candidate that meets the bound and fits the budget.
    pub pick: Option<usize>,
    /// When nothing is picked: the candidate closest to doing it (the smallest that meets the
    /// bound, if one does but none fits the budget; else the one nearest the bound).
    pub closest: Option<usize>,
}

impl Search {
    /// The picked candidate.
    pub fn picked(&self) -> Option<&Candidate> {
        self.pick.and_then(|i| self.candidates.get(i))
    }

    /// The all-int8 candidate (always evaluated first).
    pub fn all_int8(&self) -> Option<&Candidate> {
        self.candidates.iter().find(|c| c.role == Role::AllInt8)
    }
}

/// Runs the search; `progress` is told each candidate as it is done.
pub fn search(input: &SearchInput<'_>, progress: &dyn Fn(&Candidate)) -> Result<Search> {
    let layers = input.model.layers.len();
    if layers == 0 {
        bail!("the model has no layers");
    }
    let float_blob = pack_f32(input.model)?;
    let mut r = Runner {
        cx: Fixed {
            model: input.model,
            float_blob: &float_blob,
            calibration: input.calibration,
            options: input.options,
            heldout: input.heldout,
            criteria: &input.criteria,
            how: input.how,
        },
        done: Vec::new(),
        progress,
    };
    let int8 = vec![WeightBits::Int8; layers];
    r.run(Role::AllInt8, int8.clone())?;
    r.run(Role::AllInt4, vec![WeightBits::Int4; layers])?;
    let one_layer = |k: usize| with_int4(&int8, k);
    let mut singles = Vec::new();
    for k in 0..layers {
        singles.push((k, r.run(Role::Sensitivity, one_layer(k))?));
    }
    let method = if layers <= EXHAUSTIVE_LAYERS {
        for mask in 0u32..(1 << layers) {
            let w = (0..layers)
                .map(|k| {
                    if mask & (1 << k) != 0 {
                        WeightBits::Int4
                    } else {
                        WeightBits::Int8
                    }
                })
                .collect();
            r.run(Role::Other, w)?;
        }
        Method::Exhaustive
    } else {
        // Least agreement lost per byte saved first; ties by layer.
        let base = r.done.first().map_or((0, 0), |c| (c.agree, c.bytes));
        let mut order: Vec<(usize, f64)> = singles
            .iter()
            .filter_map(|&(k, i)| r.done.get(i).map(|c| (k, cost_per_byte(base, c))))
            .collect();
        order.sort_by(|a, b| a.1.total_cmp(&b.1).then(a.0.cmp(&b.0)));
        let mut current = int8.clone();
        for (k, _) in order {
            let trial = with_int4(&current, k);
            let i = r.run(Role::Step, trial.clone())?;
            if r.done.get(i).is_some_and(|c| c.meets) {
                current = trial;
            }
        }
        Method::Greedy
    };
    let done = r.done;
    let (pick, closest) = choose(&done, input.flash_budget);
    Ok(Search {
        method,
        candidates: done,
        pick,
        closest,
    })
}

/// Evaluates candidates once each, in order.
struct Runner<'a> {
    cx: Fixed<'a>,
    done: Vec<Candidate>,
    progress: &'a dyn Fn(&Candidate),
}

impl Runner<'_> {
    /// The index of `weights`' candidate, evaluated now unless it was before.
    fn run(&mut self, role: Role, weights: Vec<WeightBits>) -> Result<usize> {
        if let Some(i) = self.done.iter().position(|c| c.weights == weights) {
            return Ok(i);
        }
        let c = evaluate(&self.cx, role, weights)?;
        (self.progress)(&c);
        self.done.push(c);
        Ok(self.done.len() - 1)
    }
}

/// `weights` with layer `k` in int4.
fn with_int4(weights: &[WeightBits], k: usize) -> Vec<WeightBits> {
    let mut w = weights.to_vec();
    if let Some(b) = w.get_mut(k) {
        *b = WeightBits::Int4;
    }
    w
}

/// Agreement lost per byte saved by a one-layer candidate, against `(agree, bytes)` of all
/// int8.
fn cost_per_byte(base: (u64, usize), c: &Candidate) -> f64 {
    let lost = base.0 as f64 - c.agree as f64;
    let saved = base.1.saturating_sub(c.bytes).max(1) as f64;
    lost / saved
}

/// The pick (smallest meeting the bound and the budget; ties: fewer int4 layers, then the
/// earlier) and, without one, the closest candidate.
fn choose(done: &[Candidate], budget: Option<u64>) -> (Option<usize>, Option<usize>) {
    let fits = |c: &Candidate| budget.is_none_or(|b| c.bytes as u64 <= b);
    let smallest = |keep: &dyn Fn(&Candidate) -> bool| {
        done.iter()
            .enumerate()
            .filter(|(_, c)| keep(c))
            .min_by(|(i, a), (j, b)| {
                a.bytes
                    .cmp(&b.bytes)
                    .then(a.int4_layers().cmp(&b.int4_layers()))
                    .then(i.cmp(j))
            })
            .map(|(i, _)| i)
    };
    if let Some(i) = smallest(&|c| c.meets && fits(c)) {
        return (Some(i), None);
    }
    if let Some(i) = smallest(&|c| c.meets) {
        return (None, Some(i));
    }
    let nearest = done
        .iter()
        .enumerate()
        .min_by(|(i, a), (j, b)| {
            a.shortfall
                .total_cmp(&b.shortfall)
                .then(a.bytes.cmp(&b.bytes))
                .then(i.cmp(j))
        })
        .map(|(i, _)| i);
    (None, nearest)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn cand(bytes: usize, meets: bool, shortfall: f64, int4: usize) -> Candidate {
        let mut weights = vec![WeightBits::Int8; 3];
        for w in weights.iter_mut().take(int4) {
            *w = WeightBits::Int4;
        }
        Candidate {
            role: Role::Other,
            weights,
            bytes,
            rows: 10,
            float_correct: None,
            int8_correct: None,
            drop_pp: None,
            drop_interval_pp: None,
            agree: 10,
            agreement_pct: 100.0,
            meets,
            shortfall,
            blob: Vec::new(),
            classes: Vec::new(),
        }
    }

    #[test]
    fn picks_the_smallest_that_meets_and_fits() {
        let c = [
            cand(900, true, 0.0, 0),
            cand(500, false, 2.0, 3),
            cand(600, true, 0.0, 2),
            cand(600, true, 0.0, 1),
        ];
        // 600 bytes twice: the one with fewer int4 layers.
        assert_eq!(choose(&c, None), (Some(3), None));
        assert_eq!(choose(&c, Some(700)), (Some(3), None));
        // Nothing fits 550: the smallest that meets the bound is the closest.
        assert_eq!(choose(&c, Some(550)), (None, Some(3)));
        // Nothing meets: the nearest to the bound.
        let none = [cand(900, false, 0.5, 0), cand(500, false, 0.2, 3)];
        assert_eq!(choose(&none, None), (None, Some(1)));
    }

    #[test]
    fn cost_is_agreement_lost_per_byte_saved() {
        let mut c = cand(600, true, 0.0, 1);
        c.agree = 7;
        assert!((cost_per_byte((10, 900), &c) - 3.0 / 300.0).abs() < 1e-15);
        // No byte saved: counted as one, not a division by zero.
        c.bytes = 900;
        assert!((cost_per_byte((10, 900), &c) - 3.0).abs() < 1e-15);
    }
}
