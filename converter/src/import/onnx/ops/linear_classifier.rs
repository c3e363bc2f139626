//! `ai.onnx.ml` `LinearClassifier`: one dense layer and its output function, as skl2onnx writes
//! scikit-learn's linear classifiers (`LogisticRegression`, `LinearSVC`, `RidgeClassifier`).
//!
//! The op computes `scores = X · coefficientsᵀ + intercepts` (`coefficients` row-major
//! `[classes][features]`), then `post_transform` on every score. With one coefficient row and
//! two class labels the scores are `[-s, s]` (onnx's reference implementation,
//! `op_linear_classifier.py`). Mapping onto a [`DenseLayer`] and an [`OutputKind`]:
//!
//! | post_transform | rows | kept as |
//! |---|---|---|
//! | `NONE` | k (or 1 with two labels: rows `-w`, `w`) | k outputs, `Logits` |
//! | `SOFTMAX` | k (or 1 as above) | k outputs, `Softmax` |
//! | `LOGISTIC` | 1, or 2 that are exact negations (`-w`, `w`) | the `w` row, `Sigmoid`: `[σ(-s), σ(s)] = [1 - p, p]` |
//! | `LOGISTIC` | k, followed by `Normalizer` (`norm = L1`) | k outputs, `OneVsRest` |
//!
//! `LOGISTIC` on several independent rows without the `Normalizer` (per-class probabilities
//! that do not sum to 1), `SOFTMAX_ZERO`, `PROBIT` and unknown attributes are refused.
//! Output 0 (the predicted label) must be a graph output or unused; the class labels
//! (`classlabels_ints` or `classlabels_strings`) are kept as the model's labels.

use crate::graph::{Activation, DenseLayer, OutputKind};

use super::super::attr;
use super::super::error::OnnxImportError;
use super::super::graph_index::GraphIndex;
use super::super::node::Node;
use super::super::normalise::{Stage, Walk};
use super::labels::LabelBranch;

/// The attributes the op defines (ONNX-ML opset 1).
const KNOWN: &[&str] = &[
    "coefficients",
    "intercepts",
    "classlabels_ints",
    "classlabels_strings",
    "multi_class",
    "post_transform",
];

/// What the op's `post_transform` becomes.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Post {
    /// A finished output function.
    Done(OutputKind),
    /// Logistic of each of several scores: only valid when a `Normalizer` (L1) follows.
    Logistic,
}

/// The layer and output function of a `LinearClassifier` whose attributes are already read.
///
/// `weights` is row-major `[rows][inputs]`, `bias` has `rows` values (or is empty for zeros).
pub fn layer(
    weights: &[f32],
    bias: &[f32],
    inputs: usize,
    classes: usize,
    post: &str,
) -> Result<(DenseLayer, Post), String> {
    if inputs == 0 || weights.is_empty() || !weights.len().is_multiple_of(inputs) {
        return Err(format!(
            "{} coefficients for {inputs} input features; supported: classes × features coefficients",
            weights.len()
        ));
    }
    let rows = weights.len() / inputs;
    let bias = if bias.is_empty() {
        vec![0.0; rows]
    } else {
        bias.to_vec()
    };
    if bias.len() != rows {
        return Err(format!(
            "{} intercepts for {rows} coefficient rows; supported: one intercept per row",
            bias.len()
        ));
    }
    if let Some((i, v)) = weights
        .iter()
        .chain(&bias)
        .enumerate()
        .find(|(_, v)| !v.is_finite())
    {
        return Err(format!(
            "coefficient or intercept #{i} is {v}; supported: finite values"
        ));
    }
    // One row with two labels stands for the scores [-s, s].
    let (weights, bias) = match (rows, classes) {
        (1, 2) => {
            let neg = |v: &[f32]| v.iter().map(|x| -x).collect::<Vec<f32>>();
            ([neg(weights), weights.to_vec()].concat(), vec![-bias[0], bias[0]])
        }
        (r, c) if r == c => (weights.to_vec(), bias),
        (r, c) => {
            return Err(format!(
                "{r} coefficient rows for {c} class labels; supported: one row per class, or one row for two classes"
            ))
        }
    };
    let dense = |weights: Vec<f32>, bias: Vec<f32>| DenseLayer {
        inputs,
        outputs: bias.len(),
        weights,
        bias,
        activation: Activation::Linear,
    };
    let negated = bias.len() == 2
        && bias.first().map(|b| -b) == bias.get(1).copied()
        && weights
            .iter()
            .zip(weights.get(inputs..).unwrap_or(&[]))
            .all(|(a, b)| -a == *b);
    match post {
        "NONE" => Ok((dense(weights, bias), Post::Done(OutputKind::Logits))),
        "SOFTMAX" => Ok((dense(weights, bias), Post::Done(OutputKind::Softmax))),
        "LOGISTIC" if negated => {
            let w = weights.get(inputs..).unwrap_or(&[]).to_vec();
            let b = bias.get(1..).unwrap_or(&[]).to_vec();
            Ok((dense(w, b), Post::Done(OutputKind::Sigmoid)))
        }
        "LOGISTIC" => Ok((dense(weights, bias), Post::Logistic)),
        other => Err(format!(
            "post_transform {other}; supported: NONE, SOFTMAX, LOGISTIC (not SOFTMAX_ZERO or PROBIT)"
        )),
    }
}

/// The class labels: `classlabels_ints` or `classlabels_strings`, exactly one of them.
fn class_labels(n: &Node<'_>) -> Result<Vec<String>, String> {
    let ints = attr::ints(n.proto, "classlabels_ints")?;
    let strings = attr::strings(n.proto, "classlabels_strings")?;
    match (ints, strings) {
        (Some(i), None) if !i.is_empty() => Ok(i.iter().map(i64::to_string).collect()),
        (None, Some(s)) if !s.is_empty() => Ok(s),
        (Some(_), Some(_)) => Err(
            "both classlabels_ints and classlabels_strings are set; supported: one of them".into(),
        ),
        _ => Err("no class labels; supported: classlabels_ints or classlabels_strings".into()),
    }
}

/// The label output (#0): unused, or a graph output read by nothing else.
fn label_output<'g>(g: &GraphIndex<'g>, n: &Node<'g>) -> Result<Option<&'g str>, String> {
    match n.outputs().first().map(String::as_str) {
        None | Some("") => Ok(None),
        Some(y) if g.consumers(y).is_empty() => Ok(g.is_graph_output(y).then_some(y)),
        Some(y) => Err(format!(
            "its label output '{y}' is read by other nodes; supported: the label as a graph output or unused"
        )),
    }
}

/// The graph walk's handler of the op.
impl<'g> Walk<'g, '_> {
    /// Adds the layer and output function; returns the scores output (#1).
    pub(in super::super) fn linear_classifier(
        &mut self,
        n: Node<'g>,
        pos: usize,
    ) -> Result<&'g str, OnnxImportError> {
        if pos != 0 || n.inputs().len() != 1 {
            return Err(n.err("supported: LinearClassifier with the data as its only input"));
        }
        if let Some(a) = n
            .proto
            .attribute
            .iter()
            .find(|a| !KNOWN.contains(&a.name.as_deref().unwrap_or("")))
        {
            return Err(n.err(format!(
                "attribute '{}' is not supported; supported: {}",
                a.name.as_deref().unwrap_or(""),
                KNOWN.join(", ")
            )));
        }
        let multi_class = attr::int_or(n.proto, "multi_class", 0).map_err(|e| n.err(e))?;
        if multi_class != 0 && multi_class != 1 {
            return Err(n.err(format!("multi_class = {multi_class}; supported: 0 or 1")));
        }
        let post = attr::strings(n.proto, "post_transform")
            .map_err(|e| n.err(e))?
            .map_or(Ok("NONE".to_string()), |v| match v.as_slice() {
                [one] => Ok(one.clone()),
                _ => Err(n.err("post_transform is not a single string")),
            })?;
        let labels = class_labels(&n).map_err(|e| n.err(e))?;
        let weights = attr::floats(n.proto, "coefficients")
            .map_err(|e| n.err(e))?
            .ok_or_else(|| n.err("no coefficients; supported: a coefficients attribute"))?;
        let bias = attr::floats(n.proto, "intercepts")
            .map_err(|e| n.err(e))?
            .unwrap_or_default();
        let width = self.shape.get(1).copied().flatten();
        let inputs = match (width, bias.len()) {
            (Some(w), _) => w,
            (None, 0) => {
                return Err(n.err(
                    "the input width is unknown and there are no intercepts to tell the number of rows; supported: a graph input of known width",
                ))
            }
            (None, rows) => weights.len() / rows.max(1),
        };
        let (dense, post) =
            layer(&weights, &bias, inputs, labels.len(), &post).map_err(|e| n.err(e))?;
        self.push_layer(&n, dense)?;
        if self.labels.is_some() {
            return Err(n.err("a second set of class labels; supported: one"));
        }
        let label_out = label_output(self.g, &n).map_err(|e| n.err(e))?;
        let branch = LabelBranch {
            argmax: n,
            labels,
            outputs: label_out.into_iter().collect(),
        };
        self.labels = Some((branch, self.layers.len()));
        match post {
            Post::Done(kind) => self.output = kind,
            Post::Logistic => self.pending_logistic = Some(n),
        }
        self.stage = Stage::Output;
        match n.outputs().get(1).map(String::as_str) {
            Some(z) if !z.is_empty() => Ok(z),
            _ => Err(n.err("it has no scores output (#1); supported: the scores as output #1")),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn one_row_two_classes_gives_negated_scores() {
        let (l, p) = layer(&[1.0, 2.0], &[0.5], 2, 2, "NONE").unwrap();
        assert_eq!(p, Post::Done(OutputKind::Logits));
        assert_eq!(l.weights, vec![-1.0, -2.0, 1.0, 2.0]);
        assert_eq!(l.bias, vec![-0.5, 0.5]);
        let (l, p) = layer(&[1.0, 2.0], &[0.5], 2, 2, "SOFTMAX").unwrap();
        assert_eq!((l.outputs, p), (2, Post::Done(OutputKind::Softmax)));
    }

    #[test]
    fn logistic_on_a_negated_pair_is_one_sigmoid_output() {
        // What skl2onnx writes for a binary LogisticRegression: rows -w, w and intercepts -b, b.
        let (l, p) = layer(&[-1.0, 3.0, 1.0, -3.0], &[0.25, -0.25], 2, 2, "LOGISTIC").unwrap();
        assert_eq!(p, Post::Done(OutputKind::Sigmoid));
        assert_eq!((l.inputs, l.outputs), (2, 1));
        assert_eq!((l.weights, l.bias), (vec![1.0, -3.0], vec![-0.25]));
        // One row with two labels is the same model.
        let (l1, p1) = layer(&[1.0, -3.0], &[-0.25], 2, 2, "LOGISTIC").unwrap();
        assert_eq!((l1.weights, l1.bias, p1), (vec![1.0, -3.0], vec![-0.25], p));
    }

    #[test]
    fn logistic_on_independent_rows_waits_for_a_normalizer() {
        let (l, p) = layer(&[1.0, 0.0, 0.0, 1.0, 1.0, 1.0], &[], 2, 3, "LOGISTIC").unwrap();
        assert_eq!(p, Post::Logistic);
        assert_eq!((l.outputs, l.bias), (3, vec![0.0; 3]));
        // Two rows that are not exact negations are independent too.
        let (_, p2) = layer(&[1.0, 2.0, -1.0, -2.5], &[0.0, 0.0], 2, 2, "LOGISTIC").unwrap();
        assert_eq!(p2, Post::Logistic);
    }

    #[test]
    fn refusals_name_what_is_supported() {
        let e = layer(&[1.0, 2.0], &[0.0], 2, 2, "PROBIT").unwrap_err();
        assert!(e.contains("PROBIT") && e.contains("supported: NONE"), "{e}");
        assert!(layer(&[1.0, 2.0], &[0.0], 2, 2, "SOFTMAX_ZERO").is_err());
        let e = layer(&[1.0, 2.0, 3.0], &[0.0], 2, 2, "NONE").unwrap_err();
        assert!(e.contains("3 coefficients for 2 input features"), "{e}");
        let e = layer(&[1.0; 6], &[0.0; 3], 2, 4, "NONE").unwrap_err();
        assert!(e.contains("3 coefficient rows for 4 class labels"), "{e}");
        let e = layer(&[1.0; 6], &[0.0; 2], 2, 3, "NONE").unwrap_err();
        assert!(e.contains("2 intercepts for 3 coefficient rows"), "{e}");
        let e = layer(&[1.0, f32::NAN], &[0.0], 2, 2, "NONE").unwrap_err();
        assert!(e.contains("NaN"), "{e}");
    }
}
