//! Errors of the ONNX importer. Every message names what is wrong and where: the node (name, op
//! type, domain), the value or tensor, what was found and what is supported.

use std::fmt;
use std::path::PathBuf;

/// Identifies a graph node in messages: its name, op type, domain and position in the graph.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct NodeRef {
    /// The node's `name` (may be empty in the file).
    pub name: String,
    /// The node's `op_type`.
    pub op_type: String,
    /// The node's domain as written ("" for the default operator set).
    pub domain: String,
    /// Position of the node in `GraphProto.node`.
    pub index: usize,
}

impl fmt::Display for NodeRef {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let domain = if self.domain.is_empty() {
            "ai.onnx"
        } else {
            self.domain.as_str()
        };
        if self.name.is_empty() {
            write!(
                f,
                "#{} (unnamed, op {}, domain {})",
                self.index, self.op_type, domain
            )
        } else {
            write!(
                f,
                "'{}' (op {}, domain {})",
                self.name, self.op_type, domain
            )
        }
    }
}

/// The ops the importer understands, for "supported:" parts of messages.
pub const SUPPORTED_OPS: &str = "MatMul, Add, Gemm, Relu, Softmax, Sigmoid, Tanh, \
    LeakyRelu, Clip, HardSigmoid, HardSwish, Elu, Selu, Softplus, Gelu (also as Div, Erf, Add, \
    Mul, Mul), BatchNormalization, Flatten, Reshape, Identity, Dropout, Cast (to float), Sub, Mul, Div, \
    Constant, ArgMax, Concat (binary outputs) in domain ai.onnx, and Scaler, LinearClassifier, \
    Normalizer (L1), ArrayFeatureExtractor in domain ai.onnx.ml; on constants also Transpose, \
    Squeeze, Unsqueeze (folded at import); on the data's shape Shape, Gather, Slice, Squeeze, \
    Unsqueeze, Concat, Reshape, Cast";

/// Why an ONNX model could not be imported.
#[derive(Debug, thiserror::Error)]
pub enum OnnxImportError {
    /// The file could not be read.
    #[error("cannot read ONNX file {}", path.display())]
    Io {
        /// The file.
        path: PathBuf,
        /// The I/O error.
        #[source]
        source: std::io::Error,
    },
    /// The bytes are not a protobuf `ModelProto` (truncated, corrupt or another format).
    #[error("not a valid ONNX model (truncated, corrupt, or not an ONNX file)")]
    Decode(#[from] prost::DecodeError),
    /// The model has no graph.
    #[error("the ONNX model has no graph")]
    NoGraph,
    /// The graph has no nodes.
    #[error(
        "the ONNX graph has no nodes; supported: a chain of dense layers (MatMul+Add or Gemm)"
    )]
    EmptyGraph,
    /// Not exactly one graph input that is not an initializer.
    #[error("the graph has {} data inputs ({}); supported: exactly one graph input that is not an initializer", names.len(), names.join(", "))]
    Inputs {
        /// Names of the graph inputs that are not initializers.
        names: Vec<String>,
    },
    /// The graph input has an unsupported type or shape.
    #[error("graph input '{name}': {detail}")]
    Input {
        /// Input name.
        name: String,
        /// What is wrong.
        detail: String,
    },
    /// An op the importer does not know at all (or not at this place in the graph).
    #[error("node {node}: op {} is not supported{}; supported: {}", node.op_type, if stage.is_empty() { String::new() } else { format!(" {stage}") }, SUPPORTED_OPS)]
    UnsupportedOp {
        /// The node.
        node: NodeRef,
        /// Where in the graph it was met (may be empty).
        stage: String,
    },
    /// A known op used in a way that is not supported, or with bad operands.
    #[error("node {node}: {detail}")]
    Node {
        /// The node.
        node: NodeRef,
        /// What was found and what is supported.
        detail: String,
    },
    /// Two definitions (nodes, initializers, the graph input) of the same value.
    #[error("value '{value}' is defined twice: by {first} and by {second}; supported: each value defined once")]
    DuplicateValue {
        /// The value name.
        value: String,
        /// The first definition (a node, an initializer or the graph input).
        first: String,
        /// The second definition.
        second: String,
    },
    /// A node reads a value that nothing defines.
    #[error(
        "node {node}: input '{value}' is not produced by any node, initializer or graph input"
    )]
    UndefinedValue {
        /// The node.
        node: NodeRef,
        /// The missing value.
        value: String,
    },
    /// The graph has a cycle.
    #[error("the graph has a cycle through node {node}; supported: an acyclic graph")]
    Cycle {
        /// A node on (or after) the cycle.
        node: NodeRef,
    },
    /// A node that does not take part in computing the model's outputs from its input.
    #[error("node {node} is not connected to the model: {detail}")]
    Disconnected {
        /// The node.
        node: NodeRef,
        /// How it is disconnected.
        detail: String,
    },
    /// The graph outputs do not match what the importer recognised.
    #[error("graph outputs: {detail}")]
    Output {
        /// What is wrong.
        detail: String,
    },
}

impl OnnxImportError {
    /// The node the error is about, when it is about one.
    pub fn node(&self) -> Option<&NodeRef> {
        match self {
            Self::UnsupportedOp { node, .. }
            | Self::Node { node, .. }
            | Self::UndefinedValue { node, .. }
            | Self::Cycle { node }
            | Self::Disconnected { node, .. } => Some(node),
            _ => None,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn gemm(name: &str) -> NodeRef {
        NodeRef {
            name: name.into(),
            op_type: "Gemm".into(),
            domain: String::new(),
            index: 3,
        }
    }

    #[test]
    fn node_ref_names_node_op_and_domain() {
        assert_eq!(gemm("fc1").to_string(), "'fc1' (op Gemm, domain ai.onnx)");
        assert_eq!(
            gemm("").to_string(),
            "#3 (unnamed, op Gemm, domain ai.onnx)"
        );
        let ml = NodeRef {
            domain: "ai.onnx.ml".into(),
            ..gemm("s")
        };
        assert!(ml.to_string().contains("domain ai.onnx.ml"));
    }

    #[test]
    fn unsupported_message_lists_supported_ops() {
        let e = OnnxImportError::UnsupportedOp {
            node: gemm("x"),
            stage: "after the output".into(),
        };
        let m = e.to_string();
        assert!(
            m.starts_with(
                "node 'x' (op Gemm, domain ai.onnx): op Gemm is not supported after the output;"
            ),
            "{m}"
        );
        assert!(m.contains("MatMul") && m.contains("Scaler"), "{m}");
        assert_eq!(e.node().map(|n| n.name.as_str()), Some("x"));
    }
}
