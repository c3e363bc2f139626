//! Missed faults and false alarms: the disagreements that matter most in condition monitoring.
//!
//! When some classes are *benign* ("all is well"), a row where the float model caught a fault
//! and the int8 model now calls it benign is a fault the device will not report — far worse
//! than any other disagreement. This module counts, per row and per fault class:
//!
//! - **new misses**: the int8 model says benign where the float model raised the fault (with
//!   labels: the row's true class is a fault and the float model got it right; without labels:
//!   the float model's class is a fault);
//! - **new false alarms**: the int8 model raises a fault where the float model said benign
//!   (with labels: the row is truly benign and the float model said benign).
use anyhow::{bail, Result};
use serde::Serialize;

use crate::dataset::{resolve_labels, DatasetError};
use crate::echo;

/// One row where quantisation changed a benign/fault call.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct FaultRow {
    /// Data row, 1-based, header not counted.
    pub data_row: usize,
    /// The row's true class (when the rows have labels).
    pub label: Option<usize>,
    /// The float model's class.
    pub float_class: usize,
    /// The int8 model's class.
    pub int8_class: usize,
}

/// Counts for one fault class.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct FaultClass {
    /// Class index.
    pub class: usize,
    /// Class name.
    pub name: String,
    /// Rows of this fault the float model raised (the reference the misses are counted in).
    pub raised_by_float: u64,
    /// Of those, rows the int8 model calls benign.
    pub new_misses: u64,
    /// Rows the int8 model wrongly raises as this fault where the float model said benign.
    pub new_false_alarms: u64,
}

/// The whole count.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct FaultReport {
    /// The benign classes, by index.
    pub benign: Vec<usize>,
    /// Their names.
    pub benign_names: Vec<String>,
    /// What a fault is judged against: `"labels"` (the rows' true classes) or `"float model"`.
    pub reference: String,
    /// Rows where the int8 model newly misses a fault, in row order.
    pub new_misses: Vec<FaultRow>,
    /// Rows where the int8 model newly raises a false alarm, in row order.
    pub new_false_alarms: Vec<FaultRow>,
    /// Per fault class (every class that is not benign).
    pub per_class: Vec<FaultClass>,
}

/// The benign classes named by `raw` (class names or indices), checked against the models.
pub fn resolve_benign(
    raw: &[String],
    class_names: &[String],
    classes: usize,
) -> Result<Vec<usize>> {
    let mut benign = resolve_labels(raw, class_names, classes).map_err(|e| match e {
        DatasetError::UnknownLabel {
            label, expected, ..
        } => anyhow::anyhow!("--benign: class {} is {expected}", echo::quoted(&label)),
        e => anyhow::anyhow!("--benign: {e}"),
    })?;
    benign.sort_unstable();
    benign.dedup();
    if benign.len() == classes {
        bail!("--benign names every class; leave at least one fault class");
    }
    Ok(benign)
}

/// Counts the new misses and false alarms of `int8` against `float` (and `labels`, when given).
pub fn count(
    benign: &[usize],
    class_names: &[String],
    classes: usize,
    labels: Option<&[usize]>,
    float: &[usize],
    int8: &[usize],
) -> FaultReport {
    let is_benign = |k: usize| benign.contains(&k);
    let name = |k: usize| class_names.get(k).cloned().unwrap_or_else(|| k.to_string());
    let mut per_class: Vec<FaultClass> = (0..classes)
        .filter(|&k| !is_benign(k))
        .map(|k| FaultClass {
            class: k,
            name: name(k),
            raised_by_float: 0,
            new_misses: 0,
            new_false_alarms: 0,
        })
        .collect();
    let (mut new_misses, mut new_false_alarms) = (Vec::new(), Vec::new());
    for (i, (&f, &q)) in float.iter().zip(int8).enumerate() {
        let label = labels.and_then(|l| l.get(i).copied());
        // The fault the float model rightly raised, and whether the row is rightly benign.
        let (raised, calm) = match label {
            Some(t) => (
                (!is_benign(t) && f == t).then_some(t),
                is_benign(t) && is_benign(f),
            ),
            None => ((!is_benign(f)).then_some(f), is_benign(f)),
        };
        let row = FaultRow {
            data_row: i + 1,
            label,
            float_class: f,
            int8_class: q,
        };
        if let Some(fault) = raised {
            if let Some(c) = per_class.iter_mut().find(|c| c.class == fault) {
                c.raised_by_float += 1;
                if is_benign(q) {
                    c.new_misses += 1;
                }
            }
            if is_benign(q) {
                new_misses.push(row);
            }
        } else if calm && !is_benign(q) {
            if let Some(c) = per_class.iter_mut().find(|c| c.class == q) {
                c.new_false_alarms += 1;
            }
            new_false_alarms.push(row);
        }
    }
    FaultReport {
        benign: benign.to_vec(),
        benign_names: benign.iter().map(|&k| name(k)).collect(),
        reference: if labels.is_some() {
            "labels"
        } else {
            "float model"
        }
        .to_string(),
        new_misses,
        new_false_alarms,
        per_class,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn names() -> Vec<String> {
        ["normal", "imbalance", "bearing_wear", "loose_mount"]
            .map(String::from)
            .into()
    }

    #[test]
    fn misses_and_alarms_against_labels() {
        // Row by row: (truth, float, int8).
        let rows = [
            (2, 2, 0), // a bearing fault float caught, int8 calls normal: a new miss
            (2, 2, 1), // still a fault (another one): not a miss
            (2, 0, 0), // float missed it too: not new
            (0, 0, 3), // truly normal, float normal, int8 raises loose mount: a new false alarm
            (0, 1, 3), // float already raised an alarm: not new
            (1, 1, 1), // agree
            (3, 3, 0), // a loose mount float caught, int8 normal: a new miss
        ];
        let t: Vec<usize> = rows.iter().map(|r| r.0).collect();
        let f: Vec<usize> = rows.iter().map(|r| r.1).collect();
        let q: Vec<usize> = rows.iter().map(|r| r.2).collect();
        let r = count(&[0], &names(), 4, Some(&t), &f, &q);
        assert_eq!(r.reference, "labels");
        assert_eq!(
            r.new_misses.iter().map(|m| m.data_row).collect::<Vec<_>>(),
            [1, 7]
        );
        assert_eq!(
            r.new_false_alarms
                .iter()
                .map(|m| m.data_row)
                .collect::<Vec<_>>(),
            [4]
        );
        let by = |k: usize| r.per_class.iter().find(|c| c.class == k).unwrap().clone();
        assert_eq!((by(2).raised_by_float, by(2).new_misses), (2, 1));
        assert_eq!(
            (
                by(3).raised_by_float,
                by(3).new_misses,
                by(3).new_false_alarms
            ),
            (1, 1, 1)
        );
        assert_eq!((by(1).raised_by_float, by(1).new_misses), (1, 0));
        assert_eq!(r.per_class.len(), 3, "every class but the benign one");
    }

    #[test]
    fn without_labels_the_float_model_is_the_reference() {
        let f = [2, 0, 1, 0];
        let q = [0, 3, 1, 0];
        let r = count(&[0], &names(), 4, None, &f, &q);
        assert_eq!(r.reference, "float model");
        assert_eq!(r.new_misses.len(), 1);
        assert_eq!(r.new_false_alarms.len(), 1);
        assert_eq!(r.new_false_alarms[0].int8_class, 3);
    }

    #[test]
    fn benign_names_resolve_and_cannot_be_everything() {
        let n = names();
        assert_eq!(
            resolve_benign(&["normal".into(), "0".into()], &n, 4).unwrap(),
            [0]
        );
        let all: Vec<String> = (0..4).map(|k| k.to_string()).collect();
        assert!(resolve_benign(&all, &n, 4)
            .unwrap_err()
            .to_string()
            .contains("every class"));
        let e = resolve_benign(&["healthy".into()], &n, 4)
            .unwrap_err()
            .to_string();
        assert!(e.starts_with("--benign: ") && e.contains("healthy"), "{e}");
    }
}
