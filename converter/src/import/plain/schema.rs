//! The plain model description as written in JSON, before any checking beyond its syntax.

use std::marker::PhantomData;
use std::path::PathBuf;

use serde::de::value::{MapAccessDeserializer, SeqAccessDeserializer};
use serde::de::{MapAccess, SeqAccess, Visitor};
use serde::{Deserialize, Deserializer};

use crate::scaler_file::ScalerSpec;

/// The whole document.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct ModelDoc {
    /// Checked before the rest of the document is read.
    #[serde(rename = "kinglet_model")]
    _format: serde::de::IgnoredAny,
    pub input_width: usize,
    #[serde(default)]
    pub scaler: Option<ScalerSpec>,
    pub layers: Vec<LayerDoc>,
    pub output: OutputDoc,
    #[serde(default)]
    pub labels: Option<Vec<String>>,
}

/// One dense layer.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct LayerDoc {
    pub inputs: usize,
    pub outputs: usize,
    pub activation: ActivationDoc,
    pub weights: InlineOr<Vec<NumOrRow>, WeightsObject>,
    pub bias: InlineOr<Vec<f64>, BiasObject>,
}

/// `"relu"` or `"linear"`.
#[derive(Debug, Clone, Copy, Deserialize)]
#[serde(rename_all = "lowercase")]
pub(super) enum ActivationDoc {
    Relu,
    Linear,
}

/// `"softmax"`, `"sigmoid"` or `"none"`.
#[derive(Debug, Clone, Copy, Deserialize)]
#[serde(rename_all = "lowercase")]
pub(super) enum OutputDoc {
    Softmax,
    Sigmoid,
    None,
}

/// How a weight matrix is laid out.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize)]
#[serde(rename_all = "snake_case")]
pub(super) enum Layout {
    /// `[outputs][inputs]`, as PyTorch's `Linear.weight`.
    OutIn,
    /// `[inputs][outputs]`, as a Keras `Dense` kernel.
    InOut,
}

impl Layout {
    pub fn name(self) -> &'static str {
        match self {
            Layout::OutIn => "out_in",
            Layout::InOut => "in_out",
        }
    }

    /// The (rows, columns) a matrix of this layout has.
    pub fn dims(self, inputs: usize, outputs: usize) -> (usize, usize) {
        match self {
            Layout::OutIn => (outputs, inputs),
            Layout::InOut => (inputs, outputs),
        }
    }
}

/// The object form of `"weights"`: a layout and either inline values or an `.npy` file.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct WeightsObject {
    pub layout: Layout,
    #[serde(default)]
    pub values: Option<Vec<NumOrRow>>,
    #[serde(default)]
    pub npy: Option<PathBuf>,
}

/// The object form of `"bias"`: an `.npy` file.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct BiasObject {
    pub npy: PathBuf,
}

/// One element of a weight list: a number (flat form) or a row of numbers (nested form).
#[derive(Debug, Deserialize)]
#[serde(
    untagged,
    expecting = "a number (flat weights) or a list of numbers (one row)"
)]
pub(super) enum NumOrRow {
    Num(f64),
    Row(Vec<f64>),
}

/// A value written either inline as a JSON list, or as a JSON object.
///
/// Hand-written rather than `#[serde(untagged)]` so that errors inside the object (an unknown
/// field, a bad layout) reach the user instead of "did not match any variant".
#[derive(Debug)]
pub(super) enum InlineOr<L, O> {
    Inline(L),
    Object(O),
}

impl<'de, L: Deserialize<'de>, O: Deserialize<'de>> Deserialize<'de> for InlineOr<L, O> {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        struct V<L, O>(PhantomData<(L, O)>);
        impl<'de, L: Deserialize<'de>, O: Deserialize<'de>> Visitor<'de> for V<L, O> {
            type Value = InlineOr<L, O>;
            fn expecting(&self, f: &mut std::fmt::Formatter) -> std::fmt::Result {
                f.write_str("a list of numbers or an object such as {\"npy\": \"file.npy\"}")
            }
            fn visit_seq<A: SeqAccess<'de>>(self, seq: A) -> Result<Self::Value, A::Error> {
                L::deserialize(SeqAccessDeserializer::new(seq)).map(InlineOr::Inline)
            }
            fn visit_map<A: MapAccess<'de>>(self, map: A) -> Result<Self::Value, A::Error> {
                O::deserialize(MapAccessDeserializer::new(map)).map(InlineOr::Object)
            }
        }
        d.deserialize_any(V(PhantomData))
    }
}
