//! wire types
use serde::{Deserialize, Serialize};

/// Activation applied to a dense layer's output (fused into requantisation).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Activation {
    /// No activation: the affine output is kept.
    Linear,
    /// `max(0, x)`.
    Relu,
}

/// How the last layer's outputs are turned into scores.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum OutputKind {
    /// Scores are the raw outputs of the last layer.
    Logits,
    /// Softmax over the outputs; the scores sum to 1.
    Softmax,
    /// One output through the logistic function: a binary classifier.
    Sigmoid,
}
