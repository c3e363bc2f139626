//! The graph walk: from the data input, follow the single chain of nodes to the output,
//! dispatching on (domain, op type) and folding what is met into a [`FloatModel`]:
//!
//! 1. before the first dense layer: the input scaler (`Scaler`, constant `Sub`/`Add`/`Mul`/
//!    `Div`), `Flatten`/`Reshape` to `[N, features]`;
//! 2. dense layers (`MatMul` [+ `Add`], `Gemm`), each optionally followed by a folded
//!    `BatchNormalization` and a `Relu`;
//! 3. an optional output function (`Softmax`, or `Sigmoid` on one output with its two-class
//!    form), and the class-label branch off the scores, which is dropped; or, instead of 2 and
//!    3, a `LinearClassifier` (a dense layer with its output function and class labels),
//!    optionally followed by a `Normalizer`.
//!
//! `Identity`, `Dropout` and `Cast` to float are removed wherever they are. A `Shape` of the
//! data starts a computation on the data's shape, evaluated at once (`ops/shape_value.rs`)
//! for the `Reshape` that reads it. Each step moves to a node not seen before, so the walk ends
//! within the graph's node count. Nodes that compute constants were folded before the walk
//! (`fold.rs`, called by the graph index).
//!
//! This file holds the walk's state and its dispatch; each op's handler is a method of [`Walk`]
//! in the op's own file under `ops/` (`ops/dense.rs`: `MatMul`, `Gemm`; `ops/affine.rs`: the
//! scaler ops; `ops/batchnorm.rs`; `ops/activation.rs`: `Relu`, `Softmax`, `Sigmoid`;
//! `ops/shape.rs`: `Flatten`, `Reshape`; `ops/passthrough.rs`: `Dropout`, `Cast`;
//! `ops/linear_classifier.rs`, `ops/normalizer.rs`, `ops/score_column.rs`: `LinearClassifier`,
//! `Normalizer`, `ArrayFeatureExtractor` of `ai.onnx.ml`), beside its maths.

use crate::graph::{DenseLayer, FloatModel, OutputKind};

use super::error::OnnxImportError;
use super::graph_index::GraphIndex;
use super::node::{Domain, Node};
use super::ops::affine::Affine;
use super::ops::labels::{self, LabelBranch};
use super::ops::shape::{self, Shape};
use super::ops::{binary_output, shape_value, single_output};
use super::proto::data_type;

/// Where the walk is.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(super) enum Stage {
    /// Before the first dense layer.
    Prefix,
    /// Right after a dense layer: a bias `Add`, `BatchNormalization` or activation may follow.
    Open,
    /// After a layer's activation.
    Closed,
    /// After the output function.
    Output,
}

/// The walk's state; each op's handler (in `ops/`, beside the op's maths) updates it.
pub(super) struct Walk<'g, 'i> {
    pub(super) g: &'i GraphIndex<'g>,
    pub(super) visited: Vec<bool>,
    pub(super) shape: Shape,
    pub(super) affine: Affine,
    pub(super) first_scaler_node: Option<Node<'g>>,
    pub(super) layers: Vec<DenseLayer>,
    pub(super) stage: Stage,
    pub(super) output: OutputKind,
    pub(super) labels: Option<(LabelBranch<'g>, usize)>,
    /// A `LinearClassifier` with `LOGISTIC` on several scores, waiting for its `Normalizer`.
    pub(super) pending_logistic: Option<Node<'g>>,
    /// The binary raw-score column (`ArrayFeatureExtractor(scores, [1])`) was met.
    pub(super) score_column_taken: bool,
    /// Values computed from the data's shape (`ops/shape_value.rs`).
    pub(super) shape_values: shape_value::ShapeValues<'g>,
}

/// Turns an indexed graph into a float model.
pub fn normalise(g: &GraphIndex<'_>) -> Result<FloatModel, OnnxImportError> {
    let mut w = Walk {
        g,
        visited: vec![false; g.nodes.len()],
        shape: input_shape(g)?,
        affine: Affine::default(),
        first_scaler_node: None,
        layers: Vec::new(),
        stage: Stage::Prefix,
        output: OutputKind::Logits,
        labels: None,
        pending_logistic: None,
        score_column_taken: false,
        shape_values: Default::default(),
    };
    let mut current = g.input_name;
    for _ in 0..=g.nodes.len() {
        let consumers: Vec<Node<'_>> = g
            .consumers(current)
            .iter()
            .filter_map(|&i| g.node(i))
            .collect();
        let (argmax, rest): (Vec<Node<'_>>, Vec<Node<'_>>) =
            consumers.into_iter().partition(labels::is_argmax);
        for a in argmax {
            w.label_branch(a)?;
        }
        let (shapes, rest): (Vec<Node<'_>>, Vec<Node<'_>>) =
            rest.into_iter().partition(shape_value::is_shape);
        for s in shapes {
            shape_value::follow(g, s, &w.shape, &mut w.shape_values, &mut w.visited)?;
        }
        current = match rest.as_slice() {
            [] => return w.finish(current),
            [n] => w.step(*n, current)?,
            [a, b] if w.stage == Stage::Output && w.output == OutputKind::Sigmoid => {
                let out = binary_output::two_class(g, *a, *b, current, &mut w.visited)?;
                w.shape = vec![w.shape.first().copied().flatten(), Some(2)];
                out
            }
            [a, b] if w.stage == Stage::Open && w.gelu_at(current, *a, *b).is_some() => {
                match w.gelu_at(current, *a, *b) {
                    Some((nodes, out)) => w.take_gelu(&nodes, *a, out)?,
                    None => current,
                }
            }
            [a, b] if w.single_raw_score() => {
                let out = binary_output::negated_pair(g, *a, *b, current, &mut w.visited)?;
                w.negate_into_two_rows();
                out
            }
            [a, b, ..] => {
                return Err(b.err(format!(
                    "value '{current}' is read by this node and by {} (and maybe more); supported: a single chain of nodes from input to output, plus the class-label branch",
                    a.node_ref()
                )))
            }
        };
    }
    Err(OnnxImportError::Output {
        detail: "the chain of nodes is longer than the graph".into(),
    })
}

/// The tracked shape of the graph input: `[N, features]` or `[N, d1, ...]`, float.
fn input_shape(g: &GraphIndex<'_>) -> Result<Shape, OnnxImportError> {
    let bad = |detail: String| OnnxImportError::Input {
        name: g.input_name.to_string(),
        detail,
    };
    let Some(tt) = g.input.r#type.as_ref().and_then(|t| t.tensor_type.as_ref()) else {
        // No type information: assume a 2-D float input whose width the first layer tells.
        return Ok(vec![None, None]);
    };
    match tt.elem_type.unwrap_or(0) {
        0 | data_type::FLOAT => {}
        other => {
            return Err(bad(format!(
                "element type {}; supported: FLOAT",
                data_type::name(other)
            )))
        }
    }
    let Some(s) = tt.shape.as_ref() else {
        return Ok(vec![None, None]);
    };
    let dims: Shape = s
        .dim
        .iter()
        .map(|d| {
            d.dim_value
                .and_then(|v| usize::try_from(v).ok())
                .filter(|&v| v > 0)
        })
        .collect();
    if dims.len() < 2 {
        return Err(bad(format!(
            "shape {} has rank {}; supported: a batch dimension first, [N, features] or [N, d1, d2, ...]",
            shape::text(&dims),
            dims.len()
        )));
    }
    Ok(dims)
}

impl<'g> Walk<'g, '_> {
    pub(super) fn stage_text(&self) -> &'static str {
        match self.stage {
            Stage::Prefix => "before the first dense layer",
            Stage::Open => "after a dense layer",
            Stage::Closed => "after an activation",
            Stage::Output => "after the output function",
        }
    }

    fn label_branch(&mut self, a: Node<'g>) -> Result<(), OnnxImportError> {
        if self.layers.is_empty() {
            return Err(a.err("ArgMax before any dense layer; supported: ArgMax over the model's scores (class-label branch)"));
        }
        if self.labels.is_some() {
            return Err(a.err("a second class-label branch; supported: one"));
        }
        let branch = labels::follow(self.g, a, &mut self.visited)?;
        self.labels = Some((branch, self.layers.len()));
        Ok(())
    }

    /// Processes node `n`, which reads the data value `current`; returns its data output.
    fn step(&mut self, n: Node<'g>, current: &str) -> Result<&'g str, OnnxImportError> {
        if let Some(v) = self.visited.get_mut(n.index) {
            *v = true;
        }
        let positions: Vec<usize> = n
            .inputs()
            .iter()
            .enumerate()
            .filter(|(_, i)| i.as_str() == current)
            .map(|(k, _)| k)
            .collect();
        let pos = match positions.as_slice() {
            [p] => *p,
            _ => {
                return Err(n.err(format!(
                    "reads the data value '{current}' more than once; supported: once"
                )))
            }
        };
        match (n.domain(), n.op()) {
            (Domain::Onnx, "Identity") => {}
            (Domain::Onnx, "Dropout") => self.dropout(n)?,
            (Domain::Onnx, "Cast") => self.cast(n)?,
            (Domain::Onnx, "Flatten") => self.flatten(n)?,
            (Domain::Onnx, "Reshape") => self.reshape(n)?,
            (Domain::Ml, "Scaler") => self.scaler_op(n)?,
            (Domain::Onnx, "Sub" | "Add" | "Mul" | "Div") => self.arith(n, pos)?,
            (Domain::Onnx, "MatMul") => self.matmul(n, pos)?,
            (Domain::Onnx, "Gemm") => self.gemm(n, pos)?,
            (Domain::Onnx, "BatchNormalization") => self.batchnorm(n, pos)?,
            (Domain::Onnx, "Relu") => self.relu(n)?,
            (Domain::Onnx, "Softmax") => self.softmax(n)?,
            (Domain::Onnx, "Sigmoid") if self.sigmoid_is_hidden(&n) => self.pointwise(n)?,
            (Domain::Onnx, "Sigmoid") => self.sigmoid(n)?,
            (
                Domain::Onnx,
                "Tanh" | "LeakyRelu" | "Clip" | "HardSigmoid" | "HardSwish" | "Elu" | "Selu"
                | "Softplus" | "Gelu",
            ) => self.pointwise(n)?,
            (Domain::Ml, "LinearClassifier") => return self.linear_classifier(n, pos),
            (Domain::Ml, "Normalizer") => self.normalizer(n)?,
            (Domain::Ml, "ArrayFeatureExtractor") => self.score_column(n, pos)?,
            (Domain::Ml, "ZipMap") => {
                return Err(n.err(
                    "ZipMap (probabilities as a list of dictionaries) is not supported; supported: probabilities as a tensor (with skl2onnx, export with options {id(classifier): {'zipmap': False}})",
                ))
            }
            (Domain::Onnx, "Concat" | "Constant" | "ArgMax") => {
                return Err(n.unsupported(format!("on the data path {}", self.stage_text())))
            }
            _ => return Err(n.unsupported("")),
        }
        // Checked after dispatch, so that an unknown op is reported as such first.
        single_output(self.g, &n)
    }

    /// The decomposed Gelu at the fork of `x` into `a` and `b` (`ops/gelu_pattern.rs`).
    fn gelu_at(&self, x: &str, a: Node<'g>, b: Node<'g>) -> Option<(Vec<usize>, &'g str)> {
        super::ops::gelu_pattern::match_gelu(self.g, x, a, b)
    }

    /// Makes the matched decomposed Gelu the last layer's activation; returns its output.
    fn take_gelu(
        &mut self,
        nodes: &[usize],
        first: Node<'g>,
        out: &'g str,
    ) -> Result<&'g str, OnnxImportError> {
        for &i in nodes {
            if let Some(v) = self.visited.get_mut(i) {
                *v = true;
            }
        }
        let act = crate::graph::Pointwise {
            kind: crate::graph::PointwiseKind::Gelu,
            params: [0.0, 0.0],
        };
        self.set_pointwise(&first, act)?;
        Ok(out)
    }

    /// A `Sigmoid` whose output a dense layer reads: a hidden activation.
    fn sigmoid_is_hidden(&self, n: &Node<'g>) -> bool {
        n.outputs()
            .first()
            .is_some_and(|o| super::ops::pointwise::feeds_dense(self.g, o))
    }

    /// Right after a dense layer with one output and no output function yet.
    fn single_raw_score(&self) -> bool {
        self.stage == Stage::Open
            && self.output == OutputKind::Logits
            && self.layers.last().is_some_and(|l| l.outputs == 1)
    }

    /// The last layer (one output `s`) as two rows giving `[-s, s]`; the output is raw scores.
    fn negate_into_two_rows(&mut self) {
        if let Some(l) = self.layers.last_mut() {
            let neg_w: Vec<f32> = l.weights.iter().map(|w| -w).collect();
            let neg_b: Vec<f32> = l.bias.iter().map(|b| -b).collect();
            l.weights = [neg_w, l.weights.clone()].concat();
            l.bias = [neg_b, l.bias.clone()].concat();
            l.outputs = 2;
        }
        self.shape = vec![self.shape.first().copied().flatten(), Some(2)];
        self.stage = Stage::Output;
    }

    pub(super) fn no_output_yet(&self, n: &Node<'_>) -> Result<(), OnnxImportError> {
        if self.stage == Stage::Output {
            return Err(n.err(format!(
                "{} after the output function; supported: Softmax or Sigmoid as the last op",
                n.op()
            )));
        }
        Ok(())
    }

    /// Appends a layer after checking that its input width chains.
    pub(super) fn push_layer(
        &mut self,
        n: &Node<'_>,
        layer: DenseLayer,
    ) -> Result<(), OnnxImportError> {
        self.no_output_yet(n)?;
        if self.shape.len() != 2 {
            return Err(n.err(format!(
                "the data has shape {}; supported: a 2-D [N, features] input to a dense layer (Flatten or Reshape first)",
                shape::text(&self.shape)
            )));
        }
        if let Some(w) = self.shape.get(1).copied().flatten() {
            if w != layer.inputs {
                let what = if self.layers.is_empty() {
                    format!("the input has {w} features")
                } else {
                    format!("the previous dense layer has {w} outputs")
                };
                return Err(n.err(format!(
                    "the weights take {} inputs but {what}; supported: a chain of dense layers whose widths match",
                    layer.inputs
                )));
            }
        }
        self.shape = vec![self.shape.first().copied().flatten(), Some(layer.outputs)];
        self.layers.push(layer);
        self.stage = Stage::Open;
        Ok(())
    }

    fn finish(self, last: &str) -> Result<FloatModel, OnnxImportError> {
        let g = self.g;
        if let Some(n) = self.pending_logistic {
            return Err(n.err(format!(
                "post_transform LOGISTIC on {} scores without a Normalizer (L1) after it: independent per-class probabilities; supported: LOGISTIC on a binary classifier, or followed by Normalizer L1 (one-vs-rest)",
                self.layers.last().map_or(0, |l| l.outputs)
            )));
        }
        let Some(first) = self.layers.first() else {
            return Err(OnnxImportError::Output {
                detail: format!(
                    "no dense layer (MatMul or Gemm) between graph input '{}' and '{last}'; supported: at least one",
                    g.input_name
                ),
            });
        };
        let input_len = first.inputs;
        if !g.is_graph_output(last) {
            return Err(OnnxImportError::Output {
                detail: format!("the model's last value '{last}' is not a graph output"),
            });
        }
        let label_outputs: &[&str] = self
            .labels
            .as_ref()
            .map_or(&[], |(b, _)| b.outputs.as_slice());
        if let Some(o) = g
            .outputs
            .iter()
            .find(|o| **o != last && !label_outputs.contains(o))
        {
            return Err(OnnxImportError::Output {
                detail: format!(
                    "graph output '{o}' is neither the scores ('{last}') nor the class label; supported: the scores and optionally the label"
                ),
            });
        }
        if let Some(n) = g.nodes.iter().find(|n| {
            !g.computes_constant(n.index) && !self.visited.get(n.index).copied().unwrap_or(false)
        }) {
            return Err(OnnxImportError::Disconnected {
                node: n.node_ref(),
                detail: format!(
                    "it is not on the chain from graph input '{}' to output '{last}'",
                    g.input_name
                ),
            });
        }
        let model_classes = match (self.output, self.layers.last()) {
            (OutputKind::Sigmoid, _) => 2,
            (_, Some(l)) => l.outputs,
            _ => 0,
        };
        let labels = match self.labels {
            None => Vec::new(),
            Some((b, at)) => {
                if at != self.layers.len() {
                    return Err(b.argmax.err(format!(
                        "ArgMax reads the output of dense layer {at} of {}; supported: ArgMax over the model's scores",
                        self.layers.len()
                    )));
                }
                if !b.labels.is_empty() && b.labels.len() != model_classes {
                    return Err(b.argmax.err(format!(
                        "the class-label tensor has {} labels but the model has {model_classes} classes",
                        b.labels.len()
                    )));
                }
                b.labels
            }
        };
        let scaler = self
            .affine
            .finish(input_len)
            .map_err(|e| match self.first_scaler_node {
                Some(n) => n.err(format!("input scaler: {e}")),
                None => OnnxImportError::Output { detail: e },
            })?;
        Ok(FloatModel {
            input_len,
            scaler,
            layers: self.layers,
            output: self.output,
            labels,
        })
    }
}

#[cfg(test)]
#[path = "normalise_tests.rs"]
mod tests;
