//! A node together with its position, for dispatch and for error messages.

use super::error::{NodeRef, OnnxImportError};
use super::proto::NodeProto;

/// Operator domain, with "" and "ai.onnx" folded together.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Domain<'a> {
    /// The default operator set ("" or "ai.onnx").
    Onnx,
    /// The ML operator set ("ai.onnx.ml").
    Ml,
    /// Anything else.
    Other(&'a str),
}

impl<'a> Domain<'a> {
    /// Classifies a domain string.
    pub fn of(domain: &'a str) -> Self {
        match domain {
            "" | "ai.onnx" => Domain::Onnx,
            "ai.onnx.ml" => Domain::Ml,
            other => Domain::Other(other),
        }
    }
}

/// A node of the graph and its index in `GraphProto.node`.
#[derive(Debug, Clone, Copy)]
pub struct Node<'g> {
    /// The node message.
    pub proto: &'g NodeProto,
    /// Its index.
    pub index: usize,
}

impl<'g> Node<'g> {
    /// The op type ("" if missing).
    pub fn op(&self) -> &'g str {
        self.proto.op_type.as_deref().unwrap_or("")
    }

    /// The folded domain.
    pub fn domain(&self) -> Domain<'g> {
        Domain::of(self.proto.domain.as_deref().unwrap_or(""))
    }

    /// Input value names ("" for an omitted optional input).
    pub fn inputs(&self) -> &'g [String] {
        &self.proto.input
    }

    /// Output value names ("" for an omitted optional output).
    pub fn outputs(&self) -> &'g [String] {
        &self.proto.output
    }

    /// Input `i`, if given and not omitted.
    pub fn input(&self, i: usize) -> Option<&'g str> {
        self.proto
            .input
            .get(i)
            .map(String::as_str)
            .filter(|s| !s.is_empty())
    }

    /// The node's identity for messages.
    pub fn node_ref(&self) -> NodeRef {
        NodeRef {
            name: self.proto.name.clone().unwrap_or_default(),
            op_type: self.op().to_string(),
            domain: self.proto.domain.clone().unwrap_or_default(),
            index: self.index,
        }
    }

    /// An error about this node.
    pub fn err(&self, detail: impl Into<String>) -> OnnxImportError {
        OnnxImportError::Node {
            node: self.node_ref(),
            detail: detail.into(),
        }
    }

    /// An "op not supported (here)" error about this node.
    pub fn unsupported(&self, stage: impl Into<String>) -> OnnxImportError {
        OnnxImportError::UnsupportedOp {
            node: self.node_ref(),
            stage: stage.into(),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn default_domain_has_two_spellings() {
        assert_eq!(Domain::of(""), Domain::Onnx);
        assert_eq!(Domain::of("ai.onnx"), Domain::Onnx);
        assert_eq!(Domain::of("ai.onnx.ml"), Domain::Ml);
        assert_eq!(Domain::of("com.example"), Domain::Other("com.example"));
    }

    #[test]
    fn omitted_inputs_read_as_none() {
        let p = NodeProto {
            input: vec!["x".into(), String::new()],
            ..Default::default()
        };
        let n = Node {
            proto: &p,
            index: 0,
        };
        assert_eq!(n.input(0), Some("x"));
        assert_eq!(n.input(1), None);
        assert_eq!(n.input(2), None);
    }
}
