//! The graph walk: from the data input, follow the single chain of nodes to the output,
//! dispatching on (domain, op type) and folding what is met into a [`FloatModel`]:
//!
//! 1. before the first dense layer: the input scaler (`Scaler`, constant `Sub`/`Add`/`Mul`/
//!    `Div`), `Flatten`/`Reshape` to `[N, features]`;
//! 2. dense layers (`MatMul` [+ `Add`], `Gemm`), each optionally followed by a folded
//!    `BatchNormalization` and a `Relu`;
//! 3. an optional output function (`Softmax`, or `Sigmoid` on one output with its two-class
//!    form), and the class-label branch off the scores, which is dropped.
//!
//! `Identity`, `Dropout` and `Cast` to float are removed wherever they are. Each step moves to
//! a node not seen before, so the walk ends within the graph's node count.

use crate::graph::{Activation, DenseLayer, FloatModel, OutputKind};

use super::attr;
use super::error::OnnxImportError;
use super::graph_index::{is_constant_node, GraphIndex};
use super::node::{Domain, Node};
use super::ops::affine::{Affine, Step};
use super::ops::labels::{self, LabelBranch};
use super::ops::shape::{self, Shape};
use super::ops::{
    batchnorm, binary_output, constant_input, dense, finite, optional_constant, single_output,
};
use super::proto::data_type;

/// Where the walk is.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Stage {
    /// Before the first dense layer.
    Prefix,
    /// Right after a dense layer: a bias `Add`, `BatchNormalization` or activation may follow.
    Open,
    /// After a layer's activation.
    Closed,
    /// After the output function.
    Output,
}

struct Walk<'g, 'i> {
    g: &'i GraphIndex<'g>,
    visited: Vec<bool>,
    shape: Shape,
    affine: Affine,
    first_scaler_node: Option<Node<'g>>,
    layers: Vec<DenseLayer>,
    stage: Stage,
    output: OutputKind,
    labels: Option<(LabelBranch<'g>, usize)>,
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
        current = match rest.as_slice() {
            [] => return w.finish(current),
            [n] => w.step(*n, current)?,
            [a, b] if w.stage == Stage::Output && w.output == OutputKind::Sigmoid => {
                let out = binary_output::two_class(g, *a, *b, current, &mut w.visited)?;
                w.shape = vec![w.shape.first().copied().flatten(), Some(2)];
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
    fn stage_text(&self) -> &'static str {
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
            (Domain::Onnx, "Cast") => {
                let to = attr::int(n.proto, "to").map_err(|e| n.err(e))?;
                if to != Some(i64::from(data_type::FLOAT)) {
                    let to = to.map_or("nothing".to_string(), |t| {
                        data_type::name(t as i32).to_string()
                    });
                    return Err(n.err(format!("Cast to {to} on the data path; supported: Cast to FLOAT (removed as a no-op)")));
                }
            }
            (Domain::Onnx, "Flatten") => {
                let axis = attr::int_or(n.proto, "axis", 1).map_err(|e| n.err(e))?;
                self.shape = shape::flatten(&self.shape, axis).map_err(|e| n.err(e))?;
            }
            (Domain::Onnx, "Reshape") => {
                let t = constant_input(self.g, &n, 1, "shape")?;
                let target = t.ints().map_err(|e| n.err(e))?;
                let allow_zero = attr::int_or(n.proto, "allowzero", 0).map_err(|e| n.err(e))? != 0;
                self.shape =
                    shape::reshape(&self.shape, target, allow_zero).map_err(|e| n.err(e))?;
            }
            (Domain::Ml, "Scaler") => self.scaler_op(n)?,
            (Domain::Onnx, "Sub" | "Add" | "Mul" | "Div") => self.arith(n, pos)?,
            (Domain::Onnx, "MatMul") => self.matmul(n, pos)?,
            (Domain::Onnx, "Gemm") => self.gemm(n, pos)?,
            (Domain::Onnx, "BatchNormalization") => self.batchnorm(n, pos)?,
            (Domain::Onnx, "Relu") => self.relu(n)?,
            (Domain::Onnx, "Softmax") => self.softmax(n)?,
            (Domain::Onnx, "Sigmoid") => self.sigmoid(n)?,
            (Domain::Ml, "ZipMap") => {
                return Err(n.err(
                    "ZipMap (probabilities as a list of dictionaries) is not supported; supported: probabilities as a tensor (with skl2onnx, export with options {id(classifier): {'zipmap': False}})",
                ))
            }
            (Domain::Onnx, "Concat" | "Constant" | "ArgMax")
            | (Domain::Ml, "ArrayFeatureExtractor") => {
                return Err(n.unsupported(format!("on the data path {}", self.stage_text())))
            }
            _ => return Err(n.unsupported("")),
        }
        // Checked after dispatch, so that an unknown op is reported as such first.
        single_output(self.g, &n)
    }

    fn no_output_yet(&self, n: &Node<'_>) -> Result<(), OnnxImportError> {
        if self.stage == Stage::Output {
            return Err(n.err(format!(
                "{} after the output function; supported: Softmax or Sigmoid as the last op",
                n.op()
            )));
        }
        Ok(())
    }

    fn dropout(&mut self, n: Node<'g>) -> Result<(), OnnxImportError> {
        if let Some(t) = optional_constant(self.g, &n, 2, "training_mode")? {
            if t.ints().is_ok_and(|v| v.iter().any(|&x| x != 0)) {
                return Err(n.err(
                    "training_mode is true; supported: inference (training_mode false or omitted)",
                ));
            }
        }
        Ok(())
    }

    fn scaler_op(&mut self, n: Node<'g>) -> Result<(), OnnxImportError> {
        if self.stage != Stage::Prefix {
            return Err(n.err(format!(
                "Scaler {}; supported: Scaler before the first dense layer",
                self.stage_text()
            )));
        }
        if self.shape.len() != 2 {
            return Err(n.err(format!(
                "Scaler on data of shape {}; supported: [N, features]",
                shape::text(&self.shape)
            )));
        }
        let offset = attr::floats(n.proto, "offset")
            .map_err(|e| n.err(e))?
            .unwrap_or_else(|| vec![0.0]);
        let scale = attr::floats(n.proto, "scale")
            .map_err(|e| n.err(e))?
            .unwrap_or_else(|| vec![1.0]);
        let width = self.shape.get(1).copied().flatten();
        for (what, v) in [("offset", &offset), ("scale", &scale)] {
            if let Some((i, x)) = v.iter().enumerate().find(|(_, x)| !x.is_finite()) {
                return Err(n.err(format!(
                    "attribute {what} has a non-finite value ({x}) at index {i}"
                )));
            }
            let len_ok = v.len() == 1 || width.is_none_or(|w| w == v.len());
            if v.is_empty() || !len_ok {
                return Err(n.err(format!(
                    "attribute {what} has {} values for data of shape {}; supported: 1 value or one per feature",
                    v.len(),
                    shape::text(&self.shape)
                )));
            }
        }
        self.affine
            .apply_scaler_op(&offset, &scale)
            .map_err(|e| n.err(e))?;
        self.first_scaler_node.get_or_insert(n);
        Ok(())
    }

    fn arith(&mut self, n: Node<'g>, pos: usize) -> Result<(), OnnxImportError> {
        if n.inputs().len() != 2 {
            return Err(n.err("expected two inputs"));
        }
        let other = 1 - pos.min(1);
        let c = constant_input(self.g, &n, other, "operand")?;
        let values = finite(&n, &c, "operand")?;
        match self.stage {
            Stage::Prefix => {
                let step = match (n.op(), pos) {
                    ("Sub", 0) => Step::Sub,
                    ("Sub", _) => Step::SubFrom,
                    ("Add", _) => Step::Add,
                    ("Mul", _) => Step::Mul,
                    ("Div", 0) => Step::Div,
                    _ => {
                        return Err(n.err(
                            "a constant divided by the data is not an affine map; supported: data / constant",
                        ))
                    }
                };
                let per = shape::per_feature(&self.shape, &c.dims, values).map_err(|e| n.err(e))?;
                self.affine.apply(step, per).map_err(|e| n.err(e))?;
                self.first_scaler_node.get_or_insert(n);
                Ok(())
            }
            Stage::Open if n.op() == "Add" => {
                let layer = self.layers.last_mut().ok_or_else(|| n.err("internal: no open layer"))?;
                dense::add_bias(layer, &c).map_err(|e| n.err(e))
            }
            _ => Err(n.err(format!(
                "{} with a constant {}; supported: constant Sub/Add/Mul/Div before the first dense layer (the input scaler) and Add right after MatMul/Gemm (the bias)",
                n.op(),
                self.stage_text()
            ))),
        }
    }

    /// Appends a layer after checking that its input width chains.
    fn push_layer(&mut self, n: &Node<'_>, layer: DenseLayer) -> Result<(), OnnxImportError> {
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

    fn matmul(&mut self, n: Node<'g>, pos: usize) -> Result<(), OnnxImportError> {
        if pos != 0 || n.inputs().len() != 2 {
            return Err(n.err("the data is not MatMul's first input; supported: MatMul(x, W) with a constant W of shape [in, out]"));
        }
        let w = constant_input(self.g, &n, 1, "weight")?;
        let layer = dense::from_matmul(&w).map_err(|e| n.err(e))?;
        self.push_layer(&n, layer)
    }

    fn gemm(&mut self, n: Node<'g>, pos: usize) -> Result<(), OnnxImportError> {
        if pos != 0 {
            return Err(n.err(
                "the data is not Gemm's input A; supported: Gemm(x, B[, C]) with constant B and C",
            ));
        }
        let p = n.proto;
        let trans_a = attr::int_or(p, "transA", 0).map_err(|e| n.err(e))?;
        let trans_b = attr::int_or(p, "transB", 0).map_err(|e| n.err(e))?;
        if trans_a != 0 {
            return Err(n.err(format!("transA = {trans_a}; supported: transA = 0")));
        }
        if trans_b != 0 && trans_b != 1 {
            return Err(n.err(format!("transB = {trans_b}; supported: 0 or 1")));
        }
        let alpha = attr::float_or(p, "alpha", 1.0).map_err(|e| n.err(e))?;
        let beta = attr::float_or(p, "beta", 1.0).map_err(|e| n.err(e))?;
        if !alpha.is_finite() || !beta.is_finite() {
            return Err(n.err(format!(
                "alpha = {alpha}, beta = {beta}; supported: finite values"
            )));
        }
        let b = constant_input(self.g, &n, 1, "weight B")?;
        let c = optional_constant(self.g, &n, 2, "bias C")?;
        let layer =
            dense::from_gemm(&b, c.as_ref(), trans_b == 1, alpha, beta).map_err(|e| n.err(e))?;
        self.push_layer(&n, layer)
    }

    fn batchnorm(&mut self, n: Node<'g>, pos: usize) -> Result<(), OnnxImportError> {
        if self.stage != Stage::Open || pos != 0 {
            return Err(n.err(format!(
                "BatchNormalization {}; supported: right after a dense layer, before its activation (folded into it)",
                self.stage_text()
            )));
        }
        let training = attr::int_or(n.proto, "training_mode", 0).map_err(|e| n.err(e))?;
        if training != 0 {
            return Err(n.err("training_mode = 1; supported: inference mode (0)"));
        }
        let eps = attr::float_or(n.proto, "epsilon", 1e-5).map_err(|e| n.err(e))?;
        let params = [
            constant_input(self.g, &n, 1, "scale")?,
            constant_input(self.g, &n, 2, "B")?,
            constant_input(self.g, &n, 3, "input_mean")?,
            constant_input(self.g, &n, 4, "input_var")?,
        ];
        let [gamma, beta, mean, var] = [
            finite(&n, &params[0], "scale")?,
            finite(&n, &params[1], "B")?,
            finite(&n, &params[2], "input_mean")?,
            finite(&n, &params[3], "input_var")?,
        ];
        let layer = self
            .layers
            .last_mut()
            .ok_or_else(|| n.err("internal: no open layer"))?;
        batchnorm::fold(
            layer,
            batchnorm::BatchNorm {
                gamma,
                beta,
                mean,
                var,
                eps,
            },
        )
        .map_err(|e| n.err(e))
    }

    fn relu(&mut self, n: Node<'g>) -> Result<(), OnnxImportError> {
        match (self.stage, self.layers.last_mut()) {
            (Stage::Open, Some(l)) => {
                l.activation = Activation::Relu;
                self.stage = Stage::Closed;
                Ok(())
            }
            _ => Err(n.err(format!(
                "Relu {}; supported: Relu right after a dense layer (its activation)",
                self.stage_text()
            ))),
        }
    }

    fn softmax(&mut self, n: Node<'g>) -> Result<(), OnnxImportError> {
        if !matches!(self.stage, Stage::Open | Stage::Closed) {
            return Err(n.err(format!(
                "Softmax {}; supported: Softmax after the last dense layer",
                self.stage_text()
            )));
        }
        // The default axis is 1 before opset 13 and -1 from 13 on; on 2-D data both are the
        // class axis.
        let axis = attr::int_or(n.proto, "axis", -1).map_err(|e| n.err(e))?;
        if axis != 1 && axis != -1 {
            return Err(n.err(format!(
                "Softmax over axis {axis}; supported: axis 1 or -1 on [N, classes]"
            )));
        }
        self.output = OutputKind::Softmax;
        self.stage = Stage::Output;
        Ok(())
    }

    fn sigmoid(&mut self, n: Node<'g>) -> Result<(), OnnxImportError> {
        let outputs = match (self.stage, self.layers.last()) {
            (Stage::Open | Stage::Closed, Some(l)) => l.outputs,
            _ => {
                return Err(n.err(format!(
                    "Sigmoid {}; supported: Sigmoid on the single output of the last dense layer",
                    self.stage_text()
                )))
            }
        };
        if outputs != 1 {
            return Err(n.err(format!(
                "Sigmoid on {outputs} outputs; supported: Sigmoid on a single output (a binary classifier)"
            )));
        }
        self.output = OutputKind::Sigmoid;
        self.stage = Stage::Output;
        Ok(())
    }

    fn finish(self, last: &str) -> Result<FloatModel, OnnxImportError> {
        let g = self.g;
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
        if let Some(n) = g
            .nodes
            .iter()
            .find(|n| !is_constant_node(n) && !self.visited.get(n.index).copied().unwrap_or(false))
        {
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
mod tests {
    use super::super::test_graph::*;
    use super::super::{import_onnx, OnnxImportError};
    use crate::graph::{Activation, OutputKind, ScalerKind};

    /// x[N,2] -> MatMul(W[2,3]) -> Add(b) -> Relu -> Gemm(B[3,2]^T) -> Softmax.
    fn two_layer() -> (
        Vec<super::super::proto::NodeProto>,
        Vec<super::super::proto::TensorProto>,
    ) {
        let nodes = vec![
            node("mm", "MatMul", &["x", "W"], &["h0"]),
            node("bias", "Add", &["b", "h0"], &["h1"]),
            node("act", "Relu", &["h1"], &["h2"]),
            with_attr(
                node("fc2", "Gemm", &["h2", "B", "C"], &["z"]),
                attr_int("transB", 1),
            ),
            node("sm", "Softmax", &["z"], &["p"]),
        ];
        let inits = vec![
            floats("W", &[2, 3], &[1., 2., 3., 4., 5., 6.]),
            floats("b", &[1, 3], &[0.1, 0.2, 0.3]),
            floats("B", &[2, 3], &[1., 0., -1., 0.5, 0.5, 0.5]),
            floats("C", &[2], &[0.0, 1.0]),
        ];
        (nodes, inits)
    }

    fn import(
        nodes: Vec<super::super::proto::NodeProto>,
        inits: Vec<super::super::proto::TensorProto>,
        outs: &[&str],
    ) -> Result<crate::graph::FloatModel, OnnxImportError> {
        import_onnx(&model_bytes(graph(
            nodes,
            inits,
            vec![value("x", &[0, 2])],
            outs,
        )))
    }

    #[test]
    fn matmul_add_relu_gemm_softmax() {
        let (nodes, inits) = two_layer();
        let m = import(nodes, inits, &["p"]).unwrap();
        assert_eq!(m.input_len, 2);
        assert_eq!(m.layers.len(), 2);
        assert_eq!(m.layers[0].weights, vec![1., 4., 2., 5., 3., 6.]);
        assert_eq!(m.layers[0].bias, vec![0.1, 0.2, 0.3]);
        assert_eq!(m.layers[0].activation, Activation::Relu);
        assert_eq!(m.layers[1].weights, vec![1., 0., -1., 0.5, 0.5, 0.5]);
        assert_eq!(m.layers[1].activation, Activation::Linear);
        assert_eq!(m.output, OutputKind::Softmax);
        assert!(m.scaler.is_none() && m.labels.is_empty());
        // Worked by hand for x = [1, 1]: h = relu([5, 7, 9] + b) = [5.1, 7.2, 9.3];
        // z = [5.1 - 9.3, 0.5 * 21.6 + 1] = [-4.2, 11.8].
        let y = m.forward_reference(&[1.0, 1.0]);
        let e = (-4.2f64 - 11.8).exp();
        assert!((y[1] - 1.0 / (1.0 + e)).abs() < 1e-6, "{y:?}");
    }

    #[test]
    fn scaler_nodes_compose_before_the_first_layer() {
        let (mut nodes, mut inits) = two_layer();
        nodes[0].input[0] = "s1".into();
        nodes.insert(0, node("sub", "Sub", &["x", "mean"], &["s0"]));
        nodes.insert(1, node("div", "Div", &["s0", "std"], &["s1"]));
        inits.push(floats("mean", &[2], &[1.0, 2.0]));
        inits.push(floats("std", &[1, 2], &[2.0, 4.0]));
        let m = import(nodes, inits, &["p"]).unwrap();
        let s = m.scaler.unwrap();
        assert_eq!(
            (s.kind, s.offset, s.scale),
            (ScalerKind::Standardise, vec![1.0, 2.0], vec![0.5, 0.25])
        );
    }

    #[test]
    fn misplaced_ops_name_the_node() {
        let (mut nodes, inits) = two_layer();
        nodes[2].op_type = Some("Tanh".into());
        let e = import(nodes, inits, &["p"]).unwrap_err();
        assert!(matches!(e, OnnxImportError::UnsupportedOp { .. }));
        assert!(
            e.to_string().contains("'act' (op Tanh, domain ai.onnx)"),
            "{e}"
        );

        let (mut nodes, inits) = two_layer();
        nodes.push(node("again", "Relu", &["p"], &["q"]));
        let e = import(nodes, inits, &["q"]).unwrap_err();
        assert!(
            e.to_string().contains("'again'")
                && e.to_string().contains("after the output function"),
            "{e}"
        );

        let (mut nodes, inits) = two_layer();
        nodes.insert(0, node("early", "Relu", &["x"], &["x1"]));
        nodes[1].input[0] = "x1".into();
        let e = import(nodes, inits, &["p"]).unwrap_err();
        assert!(
            e.to_string().contains("'early'")
                && e.to_string().contains("before the first dense layer"),
            "{e}"
        );
    }

    #[test]
    fn width_mismatch_and_branching_are_rejected() {
        let (nodes, mut inits) = two_layer();
        inits[2] = floats("B", &[2, 4], &[0.0; 8]);
        let e = import(nodes, inits, &["p"]).unwrap_err();
        assert!(
            e.to_string().contains("'fc2'") && e.to_string().contains("take 4 inputs"),
            "{e}"
        );

        let (mut nodes, inits) = two_layer();
        nodes.push(node("side", "Relu", &["h2"], &["side_out"]));
        let e = import(nodes, inits, &["p", "side_out"]).unwrap_err();
        assert!(e.to_string().contains("read by"), "{e}");
    }

    #[test]
    fn dropout_mask_must_be_unused() {
        let (mut nodes, inits) = two_layer();
        nodes[4].input[0] = "zd".into();
        nodes.insert(4, node("drop", "Dropout", &["z"], &["zd", "mask"]));
        let ok = import(nodes.clone(), inits.clone(), &["p"]).unwrap();
        assert_eq!(ok.layers.len(), 2);
        let e = import(nodes, inits, &["p", "mask"]).unwrap_err();
        assert!(
            e.to_string().contains("'drop'") && e.to_string().contains("'mask'"),
            "{e}"
        );
    }

    #[test]
    fn label_branch_keeps_labels() {
        let (mut nodes, mut inits) = two_layer();
        nodes.push(with_attr(
            node("am", "ArgMax", &["p"], &["idx"]),
            attr_int("axis", 1),
        ));
        let mut afe = node(
            "afe",
            "ArrayFeatureExtractor",
            &["classes", "idx"],
            &["lab"],
        );
        afe.domain = Some("ai.onnx.ml".into());
        nodes.push(afe);
        nodes.push(node("rs", "Reshape", &["lab", "shp"], &["label"]));
        inits.push(int64s("classes", &[2], &[3, 7]));
        inits.push(int64s("shp", &[1], &[-1]));
        let m = import(nodes.clone(), inits.clone(), &["label", "p"]).unwrap();
        assert_eq!(m.labels, vec!["3", "7"]);
        inits[4] = int64s("classes", &[3], &[1, 2, 3]);
        let e = import(nodes, inits, &["label", "p"]).unwrap_err();
        assert!(
            e.to_string().contains("'am'") && e.to_string().contains("3 labels"),
            "{e}"
        );
    }

    /// x[N,2] -> Gemm(alpha 2) -> BatchNormalization -> Sigmoid -> Sub(1, p), Concat([1-p, p]).
    fn binary(concat_inputs: [&str; 2]) -> Result<crate::graph::FloatModel, OnnxImportError> {
        let nodes = vec![
            with_attr(
                node("fc", "Gemm", &["x", "B", "C"], &["z0"]),
                attr_float("alpha", 2.0),
            ),
            with_attr(
                node(
                    "bn",
                    "BatchNormalization",
                    &["z0", "g", "be", "mu", "var"],
                    &["z"],
                ),
                attr_float("epsilon", 1.0),
            ),
            node("sig", "Sigmoid", &["z"], &["p"]),
            node("neg", "Sub", &["one", "p"], &["q"]),
            with_attr(
                node("cat", "Concat", &concat_inputs, &["probs"]),
                attr_int("axis", 1),
            ),
        ];
        let inits = vec![
            floats("B", &[2, 1], &[1.0, -1.0]),
            floats("C", &[1], &[0.5]),
            floats("g", &[1], &[4.0]),
            floats("be", &[1], &[0.25]),
            floats("mu", &[1], &[1.0]),
            floats("var", &[1], &[3.0]),
            floats("one", &[], &[1.0]),
        ];
        import(nodes, inits, &["probs"])
    }

    #[test]
    fn two_class_sigmoid_form_with_alpha_and_bn() {
        let m = binary(["q", "p"]).unwrap();
        assert_eq!(m.output, OutputKind::Sigmoid);
        assert_eq!(m.layers.len(), 1);
        // alpha 2: w = [2, -2]; BN k = 4 / sqrt(3 + 1) = 2: w' = [4, -4],
        // b' = (0.5 - 1) * 2 + 0.25 = -0.75.
        assert_eq!(m.layers[0].weights, vec![4.0, -4.0]);
        assert_eq!(m.layers[0].bias, vec![-0.75]);
        let e = binary(["p", "q"]).unwrap_err();
        assert!(
            e.to_string().contains("'cat' (op Concat") && e.to_string().contains("[1 - p, p]"),
            "{e}"
        );
    }

    #[test]
    fn no_dense_layer_is_an_error() {
        let nodes = vec![node("id", "Identity", &["x"], &["y"])];
        let e = import(nodes, vec![], &["y"]).unwrap_err();
        assert!(e.to_string().contains("no dense layer"), "{e}");
    }

    #[test]
    fn garbage_bytes_do_not_panic() {
        let (nodes, inits) = two_layer();
        let bytes = model_bytes(graph(nodes, inits, vec![value("x", &[0, 2])], &["p"]));
        for cut in [1, 7, bytes.len() / 3, bytes.len() / 2, bytes.len() - 1] {
            assert!(import_onnx(&bytes[..cut]).is_err(), "cut at {cut}");
        }
        assert!(matches!(import_onnx(&[]), Err(OnnxImportError::NoGraph)));
        assert!(matches!(
            import_onnx(&[0xff, 0xff, 0xff]),
            Err(OnnxImportError::Decode(_))
        ));
    }
}
