//! The comparison as data: everything the text, JSON and HTML reports show, built from the
//! per-row outcomes.
use super::points::pp;
use serde::Serialize;

use super::faults::{self, FaultReport};
use super::fidelity::{Energy, StageFidelity};
use super::metrics::{agreement, ratio, ClassScores, Confusion};
use super::pair::{output_name, ModelPair};
use super::run::RowOutcome;
use super::stats::{
    mcnemar_exact, newcombe_paired, PairedCounts, INTERVAL_METHOD, TEST_METHOD, Z_95,
};
use super::tally::Tally;
use crate::score::feed::{Entry, Feed};

/// What the accuracy gate compares with `--max-drop`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Gate {
    /// The measured drop.
    Estimate,
    /// The upper limit of the drop's 95% interval (stricter: passes only when the data show
    /// the drop is small).
    UpperLimit,
}

/// The checks a run is judged by.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Criteria {
    /// Largest allowed accuracy drop (float minus int8) in percentage points.
    pub max_drop_pp: Option<f64>,
    /// What is compared with `max_drop_pp`.
    pub gate: Option<Gate>,
    /// Smallest allowed top-1 agreement, in percent.
    pub min_agreement_pct: Option<f64>,
    /// The benign ("all is well") classes, as the user named them (class names or indices);
    /// empty: no fault report.
    pub benign: Vec<String>,
    /// Most rows allowed where the int8 model newly misses a fault (needs `benign`).
    pub max_new_misses: Option<u64>,
}

/// Accuracy of one model.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct ModelAccuracy {
    /// Rows predicted right.
    pub correct: u64,
    /// Rows.
    pub rows: u64,
    /// `correct / rows`.
    pub accuracy: f64,
}

/// A confidence interval.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Interval {
    /// Lower limit.
    pub lower: f64,
    /// Upper limit.
    pub upper: f64,
    /// Coverage, e.g. 0.95.
    pub confidence: f64,
    /// The method's name.
    pub method: String,
}

/// McNemar's test on the discordant rows.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct McNemar {
    /// Rows exactly one model got right.
    pub discordant: u64,
    /// Two-sided p-value.
    pub p_value: f64,
    /// The method's name.
    pub method: String,
}

/// Accuracy of both models and the difference.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct AccuracyReport {
    /// The float model.
    pub float: ModelAccuracy,
    /// The int8 model.
    pub int8: ModelAccuracy,
    /// Float accuracy minus int8 accuracy, in percentage points (positive: int8 is worse).
    pub drop_pp: f64,
    /// 95% interval of the drop, in percentage points.
    pub drop_interval_pp: Interval,
    /// The paired 2×2 table (first = float, second = int8).
    pub paired: PairedCounts,
    /// McNemar's exact test.
    pub mcnemar: McNemar,
}

/// A row where the two models predict different classes.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Disagreement {
    /// 1-based data row (header not counted), as the dataset loader numbers rows.
    pub data_row: usize,
    /// Float model's class.
    pub float_class: usize,
    /// Int8 model's class.
    pub int8_class: usize,
    /// True class, if known.
    pub label: Option<usize>,
    /// Largest absolute score difference on this row.
    pub max_score_diff: f64,
}

/// Top-1 agreement.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct AgreementReport {
    /// Rows where both predict the same class.
    pub agree: u64,
    /// Rows.
    pub rows: u64,
    /// `agree / rows`.
    pub rate: f64,
    /// Every disagreeing row, worst (largest score difference) first; ties by row.
    pub disagreements: Vec<Disagreement>,
}

/// How far apart the scores are.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ScoreError {
    /// Largest `|p_float − p_int8|` over every score of every row.
    pub max_abs: f64,
    /// Mean `|p_float − p_int8|` over every score of every row.
    pub mean_abs: f64,
    /// What the scores are ("softmax probabilities", ...).
    pub unit: String,
}

/// Precision and recall of one class for both models.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ClassRow {
    /// Class index.
    pub class: usize,
    /// Class name (the index when the blob has no labels).
    pub name: String,
    /// Rows of this class.
    pub support: u64,
    /// The float model.
    pub float: ClassScores,
    /// The int8 model.
    pub int8: ClassScores,
}

/// Both confusion matrices.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ConfusionPair {
    /// The float model's.
    pub float: Confusion,
    /// The int8 model's.
    pub int8: Confusion,
}

/// One requested check.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Check {
    /// What was checked.
    pub what: String,
    /// The limit.
    pub limit: f64,
    /// The measured value compared with it.
    pub value: f64,
    /// Whether it passed.
    pub passed: bool,
    /// One line for people.
    pub text: String,
}

/// The checks and their result.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Verdict {
    /// All checks passed.
    pub passed: bool,
    /// Each check.
    pub checks: Vec<Check>,
}

/// Per-row results, for scripts (and the scikit-learn cross-check).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Predictions {
    /// The float model's class per row.
    pub float: Vec<usize>,
    /// The int8 model's class per row.
    pub int8: Vec<usize>,
    /// True class per row, if known.
    pub labels: Option<Vec<usize>>,
    /// Largest absolute score difference per row.
    pub max_score_diff: Vec<f64>,
}

/// The firmware path the int8 numbers were measured through.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Measured {
    /// The input type the int8 blob was fed.
    pub feed: Feed,
    /// The entry point whose class counts for the int8 blob.
    pub entry: Entry,
    /// The int8 call, for people: `Model::classify(Input::U8)`.
    pub int8_call: String,
    /// The float call, for people: always `Model::infer(Input::F32)` on the same values.
    pub float_call: String,
}

impl Measured {
    /// The path of `feed` and `entry`.
    pub fn new(feed: Feed, entry: Entry) -> Self {
        Measured {
            feed,
            entry,
            int8_call: format!("{}({})", entry.call_name(), feed.input_name()),
            float_call: format!("{}({})", Entry::Infer.call_name(), Feed::F32.input_name()),
        }
    }
}

impl Default for Measured {
    fn default() -> Self {
        Measured::new(Feed::F32, Entry::Infer)
    }
}

/// Rows where the int8 blob's `Model::infer` and `Model::classify` give different classes:
/// `infer` takes the argmax of float scores, which rounding can tie, `classify` that of the
/// int8 outputs.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct EntrySplit {
    /// How many rows.
    pub rows: u64,
    /// Their data rows (1-based, header not counted).
    pub data_rows: Vec<usize>,
}

/// Where the inputs came from.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Sources {
    /// The float model's file.
    pub float_model: String,
    /// The int8 blob's file.
    pub int8_model: String,
}

/// The whole comparison.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct VetReport {
    /// The float model's file.
    pub float_model: String,
    /// The int8 blob's file.
    pub int8_model: String,
    /// The dataset's file.
    pub data: String,
    /// The firmware path the int8 numbers were measured through.
    pub measured: Measured,
    /// Rows evaluated.
    pub rows: usize,
    /// Classes.
    pub classes: usize,
    /// Class names (empty when the blobs carry none).
    pub class_names: Vec<String>,
    /// Output function.
    pub output: String,
    /// Faults the int8 model newly misses or raises (when benign classes were named).
    pub faults: Option<FaultReport>,
    /// Rows that repeat an earlier row exactly.
    pub repeated_rows: u64,
    /// Accuracy (when the rows have labels).
    pub accuracy: Option<AccuracyReport>,
    /// Top-1 agreement.
    pub agreement: AgreementReport,
    /// Rows where the int8 blob's `infer` and `classify` differ.
    pub entry_split: EntrySplit,
    /// Score error.
    pub score_error: ScoreError,
    /// Per-class precision and recall (when the rows have labels).
    pub per_class: Option<Vec<ClassRow>>,
    /// Confusion matrices (when the rows have labels).
    pub confusion: Option<ConfusionPair>,
    /// SQNR of the input and of each layer's output.
    pub fidelity: Vec<StageFidelity>,
    /// The requested checks (absent when none was requested).
    pub verdict: Option<Verdict>,
    /// Remarks: undefined precisions, adopted scalers, ...
    pub notes: Vec<String>,
    /// Per-row predictions.
    pub predictions: Predictions,
}

impl VetReport {
    /// The name of class `k` (its index when the blob has no labels).
    pub fn class_name(&self, k: usize) -> String {
        self.class_names
            .get(k)
            .cloned()
            .unwrap_or_else(|| k.to_string())
    }

    /// True unless a requested check failed.
    pub fn passed(&self) -> bool {
        self.verdict.as_ref().is_none_or(|v| v.passed)
    }
}

fn model_accuracy(c: &Confusion) -> ModelAccuracy {
    ModelAccuracy {
        correct: c.correct(),
        rows: c.total(),
        accuracy: c.accuracy(),
    }
}

fn accuracy_report(
    labels: &[usize],
    fp: &[usize],
    qp: &[usize],
    cf: &Confusion,
    cq: &Confusion,
) -> AccuracyReport {
    let mut paired = PairedCounts::default();
    for ((t, f), q) in labels.iter().zip(fp).zip(qp) {
        paired.add(f == t, q == t);
    }
    let (lo, hi) = newcombe_paired(&paired, Z_95);
    AccuracyReport {
        float: model_accuracy(cf),
        int8: model_accuracy(cq),
        drop_pp: 100.0 * paired.difference(),
        drop_interval_pp: Interval {
            lower: 100.0 * lo,
            upper: 100.0 * hi,
            confidence: 0.95,
            method: INTERVAL_METHOD.to_string(),
        },
        paired,
        mcnemar: McNemar {
            discordant: paired.first_only + paired.second_only,
            p_value: mcnemar_exact(paired.first_only, paired.second_only),
            method: TEST_METHOD.to_string(),
        },
    }
}

fn verdict(
    c: &Criteria,
    acc: Option<&AccuracyReport>,
    agree: &AgreementReport,
    faults: Option<&FaultReport>,
) -> Option<Verdict> {
    let mut checks = Vec::new();
    if let (Some(limit), Some(f)) = (c.max_new_misses, faults) {
        let value = f.new_misses.len() as u64;
        let passed = value <= limit;
        checks.push(Check {
            what: "new missed faults".to_string(),
            limit: limit as f64,
            value: value as f64,
            passed,
            text: format!(
                "new missed faults {value} {} {limit} (rows where the int8 model calls {} a fault the float model caught)",
                if passed { "≤" } else { ">" },
                f.benign_names.join(" or ")
            ),
        });
    }
    if let (Some(limit), Some(a)) = (c.max_drop_pp, acc) {
        let gate = c.gate.unwrap_or(Gate::Estimate);
        let (value, what) = match gate {
            Gate::Estimate => (a.drop_pp, "accuracy drop"),
            Gate::UpperLimit => (
                a.drop_interval_pp.upper,
                "upper 95% limit of the accuracy drop",
            ),
        };
        let passed = value <= limit;
        let text = format!(
            "{what} {} pp {} {} pp (drop {} pp, 95% interval {} to {} pp)",
            pp(value),
            if passed { "≤" } else { ">" },
            pp(limit),
            pp(a.drop_pp),
            pp(a.drop_interval_pp.lower),
            pp(a.drop_interval_pp.upper)
        );
        checks.push(Check {
            what: what.to_string(),
            limit,
            value,
            passed,
            text,
        });
    }
    if let Some(limit) = c.min_agreement_pct {
        let value = 100.0 * agree.rate;
        let passed = value >= limit;
        let text = format!(
            "top-1 agreement {value:.2} % {} {limit:.2} % ({} of {} rows)",
            if passed { "≥" } else { "<" },
            agree.agree,
            agree.rows
        );
        checks.push(Check {
            what: "top-1 agreement".into(),
            limit,
            value,
            passed,
            text,
        });
    }
    if checks.is_empty() {
        return None;
    }
    Some(Verdict {
        passed: checks.iter().all(|c| c.passed),
        checks,
    })
}

fn undefined_notes(rows: &[ClassRow], notes: &mut Vec<String>) {
    for r in rows {
        for (model, s) in [("float", &r.float), ("int8", &r.int8)] {
            if s.precision_undefined() && s.support > 0 {
                notes.push(format!(
                    "class {} ({}): the {model} model never predicts it; its precision is reported as 0 (scikit-learn's zero_division=0)",
                    r.class, r.name
                ));
            }
        }
        if r.support == 0 {
            notes.push(format!(
                "class {} ({}): no rows of this class; its recall is reported as 0 (zero_division=0)",
                r.class, r.name
            ));
        }
    }
}

/// What the rows are judged against, as class indices: their labels, and the benign classes.
#[derive(Debug, Clone, Copy, Default)]
pub struct Truth<'a> {
    /// Each row's true class (when the rows have labels).
    pub labels: Option<&'a [usize]>,
    /// The benign classes (when named).
    pub benign: Option<&'a [usize]>,
}

/// Builds the report from the per-row outcomes (in row order), measured through `measured`.
pub fn summarise(
    pair: &ModelPair<'_>,
    data_source: &str,
    sources: &Sources,
    measured: &Measured,
    outcomes: &[RowOutcome],
    truth: Truth<'_>,
    criteria: &Criteria,
) -> VetReport {
    let mut tally = Tally::new(pair.stage_names().len());
    tally.add(outcomes);
    summarise_tally(pair, data_source, sources, measured, tally, truth, criteria)
}

/// [`summarise`] from the outcomes' [`Tally`] (the same report: every sum was taken in row
/// order as it is here).
pub fn summarise_tally(
    pair: &ModelPair<'_>,
    data_source: &str,
    sources: &Sources,
    measured: &Measured,
    tally: Tally,
    truth: Truth<'_>,
    criteria: &Criteria,
) -> VetReport {
    let Truth { labels, benign } = truth;
    let classes = pair.classes();
    let class_names = pair.class_names();
    let name = |k: usize| class_names.get(k).cloned().unwrap_or_else(|| k.to_string());
    let Tally {
        float: fp,
        int8: qp,
        diffs,
        split,
        sum_abs,
        count,
        energy: summed,
    } = tally;
    let rows = fp.len() as u64;

    let mut disagreements: Vec<Disagreement> = fp
        .iter()
        .zip(&qp)
        .enumerate()
        .filter(|(_, (f, q))| f != q)
        .map(|(i, (&f, &q))| Disagreement {
            data_row: i + 1,
            float_class: f,
            int8_class: q,
            label: labels.and_then(|l| l.get(i).copied()),
            max_score_diff: diffs.get(i).copied().unwrap_or(0.0),
        })
        .collect();
    disagreements.sort_by(|a, b| {
        b.max_score_diff
            .total_cmp(&a.max_score_diff)
            .then(a.data_row.cmp(&b.data_row))
    });
    let agree = agreement(&fp, &qp);
    let agreement = AgreementReport {
        agree,
        rows,
        rate: ratio(agree, rows),
        disagreements,
    };

    let entry_split = EntrySplit {
        rows: split.len() as u64,
        data_rows: split,
    };

    let score_error = ScoreError {
        max_abs: diffs.iter().copied().fold(0.0, f64::max),
        mean_abs: if count == 0 {
            0.0
        } else {
            sum_abs / count as f64
        },
        unit: pair.score_unit().to_string(),
    };

    let names = pair.stage_names();
    let mut energy = vec![Energy::default(); names.len()];
    for (e, r) in energy.iter_mut().zip(&summed) {
        e.merge(r);
    }
    let fidelity = names
        .into_iter()
        .zip(energy)
        .enumerate()
        .map(|(i, ((n, w), e))| StageFidelity::new(i, n, w, e))
        .collect();

    let mut notes = Vec::new();
    let (accuracy, per_class, confusion) = match labels {
        Some(l) => {
            let cf = Confusion::new(classes, l, &fp);
            let cq = Confusion::new(classes, l, &qp);
            let acc = accuracy_report(l, &fp, &qp, &cf, &cq);
            let per: Vec<ClassRow> = cf
                .per_class()
                .into_iter()
                .zip(cq.per_class())
                .enumerate()
                .map(|(k, (f, q))| ClassRow {
                    class: k,
                    name: name(k),
                    support: f.support,
                    float: f,
                    int8: q,
                })
                .collect();
            undefined_notes(&per, &mut notes);
            (
                Some(acc),
                Some(per),
                Some(ConfusionPair {
                    float: cf,
                    int8: cq,
                }),
            )
        }
        None => {
            notes.push("the rows have no labels: accuracy, per-class scores and confusion matrices need them; agreement and score error do not".into());
            (None, None, None)
        }
    };
    let faults = benign.map(|b| faults::count(b, &class_names, classes, labels, &fp, &qp));
    let verdict = verdict(criteria, accuracy.as_ref(), &agreement, faults.as_ref());

    VetReport {
        float_model: sources.float_model.clone(),
        int8_model: sources.int8_model.clone(),
        data: data_source.to_string(),
        measured: measured.clone(),
        rows: fp.len(),
        classes,
        class_names,
        output: output_name(pair.int8.desc().output).to_string(),
        faults,
        repeated_rows: 0,
        accuracy,
        agreement,
        entry_split,
        score_error,
        per_class,
        confusion,
        fidelity,
        verdict,
        notes,
        predictions: Predictions {
            float: fp,
            int8: qp,
            labels: labels.map(<[usize]>::to_vec),
            max_score_diff: diffs,
        },
    }
}
