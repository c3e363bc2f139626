//! `ai.onnx.ml` `Normalizer` after the output function, as skl2onnx writes it behind a
//! `LinearClassifier` so that the probabilities sum to 1. Only `norm = L1` (`x / Σ|x|`) is
//! understood:
//!
//! - after a `LOGISTIC` post-transform on several scores it makes the one-vs-rest
//!   probabilities `σ(s_k) / Σ_j σ(s_j)` ([`OutputKind::OneVsRest`]);
//! - after `Softmax`, or a binary sigmoid output (`[1 - p, p]`), the values already sum to 1, so
//!   it changes nothing beyond rounding and is removed.
//!
//! `MAX` and `L2`, and `L1` on raw scores, are refused.

use crate::graph::OutputKind;

use super::super::attr;
use super::super::error::OnnxImportError;
use super::super::node::Node;
use super::super::normalise::{Stage, Walk};

/// The graph walk's handler of the op.
impl<'g> Walk<'g, '_> {
    pub(in super::super) fn normalizer(&mut self, n: Node<'g>) -> Result<(), OnnxImportError> {
        let norm = attr::strings(n.proto, "norm")
            .map_err(|e| n.err(e))?
            .unwrap_or_else(|| vec!["MAX".to_string()]);
        if norm.as_slice() != ["L1"] {
            return Err(n.err(format!(
                "norm {}; supported: L1 after the output function",
                norm.join(",")
            )));
        }
        if self.pending_logistic.take().is_some() {
            self.output = OutputKind::OneVsRest;
            return Ok(());
        }
        match (self.stage, self.output) {
            (Stage::Output, OutputKind::Softmax | OutputKind::Sigmoid | OutputKind::OneVsRest) => {
                Ok(())
            }
            _ => Err(n.err(format!(
                "Normalizer (L1) {} on raw scores; supported: L1 after a LOGISTIC, Softmax or Sigmoid output",
                self.stage_text()
            ))),
        }
    }
}
