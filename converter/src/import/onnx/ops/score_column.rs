//! The positive-class score of a binary classifier with raw scores: skl2onnx writes a binary
//! `LinearSVC` or `RidgeClassifier` as a `LinearClassifier` with scores `[-s, s]` followed by
//! `ArrayFeatureExtractor(scores, [1])`, so that the graph output is `s`, scikit-learn's
//! `decision_function`. The model keeps both columns (class 1 wins exactly when `s > 0`, as in
//! scikit-learn's `predict`); column 1 is the graph's output.

use crate::graph::OutputKind;

use super::super::error::OnnxImportError;
use super::super::node::Node;
use super::super::normalise::{Stage, Walk};
use super::constant_input;

/// The graph walk's handler of `ArrayFeatureExtractor` on the data path.
impl<'g> Walk<'g, '_> {
    pub(in super::super) fn score_column(
        &mut self,
        n: Node<'g>,
        pos: usize,
    ) -> Result<(), OnnxImportError> {
        let two_raw = self.stage == Stage::Output
            && self.output == OutputKind::Logits
            && self.pending_logistic.is_none()
            && self.layers.last().is_some_and(|l| l.outputs == 2)
            && !self.score_column_taken;
        if !two_raw || pos != 0 || n.inputs().len() != 2 {
            return Err(n.unsupported(format!(
                "on the data path {} (supported there: ArrayFeatureExtractor(scores, [1]) after a binary LinearClassifier with raw scores)",
                self.stage_text()
            )));
        }
        let index = constant_input(self.g, &n, 1, "column index")?;
        if index.ints().ok() != Some(&[1][..]) {
            return Err(n.err(format!(
                "picks columns {:?} of the two scores; supported: column [1], the positive-class score",
                index.ints().unwrap_or(&[])
            )));
        }
        self.score_column_taken = true;
        Ok(())
    }
}
