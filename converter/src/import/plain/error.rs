//! Errors from reading a plain model description. Each names the layer (0-based, as the index
//! into `"layers"`) and the field where it applies.

use std::path::PathBuf;

use crate::dataset::NpyArrayError;
use crate::scaler_file::ScalerFileError;

/// Why a plain model description could not be imported.
#[derive(Debug, thiserror::Error)]
pub enum PlainImportError {
    /// The description file could not be read.
    #[error("{}: cannot read the file", path.display())]
    Io {
        /// The file.
        path: PathBuf,
        /// What the system said.
        #[source]
        source: std::io::Error,
    },
    /// An error inside a named description file.
    #[error("{}", path.display())]
    InFile {
        /// The file.
        path: PathBuf,
        /// What is wrong in it.
        #[source]
        source: Box<PlainImportError>,
    },
    /// The text is not valid JSON.
    #[error("not valid JSON")]
    Syntax(#[source] serde_json::Error),
    /// A field of the wrong type, an unknown field or a missing field.
    #[error("at `{location}`")]
    Json {
        /// Where in the document (`layers[1].activation`; `.` for the top level).
        location: String,
        /// What the JSON reader said, with line and column.
        #[source]
        source: serde_json::Error,
    },
    /// The document is not an object with a `"kinglet_model"` tag.
    #[error("not a Kinglet model description: expected a JSON object with the \"kinglet_model\" version tag (\"kinglet_model\": 1)")]
    NotAModel,
    /// A version this converter does not read.
    #[error("unsupported \"kinglet_model\" version {0}; this converter reads version 1")]
    UnsupportedVersion(String),
    /// `"input_width"` is 0.
    #[error("\"input_width\" is 0; a model takes at least one input")]
    ZeroInputWidth,
    /// `"layers"` is empty.
    #[error("\"layers\" is empty; a model has at least one dense layer")]
    NoLayers,
    /// A layer with no inputs or no outputs.
    #[error("layers[{layer}].{field} is 0; a layer has at least one input and one output")]
    ZeroSized {
        /// 0-based layer index.
        layer: usize,
        /// `inputs` or `outputs`.
        field: &'static str,
    },
    /// A layer's inputs differ from what feeds it.
    #[error(
        "layers[{layer}].inputs is {inputs}, but {from} is {expected}: the layers do not chain"
    )]
    ChainMismatch {
        /// 0-based layer index.
        layer: usize,
        /// The layer's `inputs`.
        inputs: usize,
        /// The width feeding it.
        expected: usize,
        /// What feeds it: `input_width` or `layers[k].outputs`.
        from: String,
    },
    /// Inline flat weights written without a layout.
    #[error("layers[{layer}].weights: a flat list needs its layout: write {{\"layout\": \"out_in\" or \"in_out\", \"values\": [...]}}")]
    FlatNeedsLayout {
        /// 0-based layer index.
        layer: usize,
    },
    /// A weight list mixing numbers and rows.
    #[error("layers[{layer}].weights: the list mixes numbers and rows; use either a flat list or a list of rows")]
    MixedMatrix {
        /// 0-based layer index.
        layer: usize,
    },
    /// The weights object has both or neither of `values` and `npy`.
    #[error("layers[{layer}].weights: give exactly one of \"values\" and \"npy\"")]
    WeightSource {
        /// 0-based layer index.
        layer: usize,
    },
    /// A flat weight list of the wrong length.
    #[error("layers[{layer}].weights: {found} values, but inputs * outputs = {inputs} * {outputs} = {}", inputs.saturating_mul(*outputs))]
    WeightCount {
        /// 0-based layer index.
        layer: usize,
        /// Values given.
        found: usize,
        /// The layer's inputs.
        inputs: usize,
        /// The layer's outputs.
        outputs: usize,
    },
    /// A nested weight list with the wrong number of rows.
    #[error("layers[{layer}].weights: {found} rows, but layout {layout} ([{rows_name}][{cols_name}]) needs {expected}")]
    RowCount {
        /// 0-based layer index.
        layer: usize,
        /// Rows given.
        found: usize,
        /// Rows needed.
        expected: usize,
        /// `out_in` or `in_out`.
        layout: &'static str,
        /// What a row stands for.
        rows_name: &'static str,
        /// What a column stands for.
        cols_name: &'static str,
    },
    /// A nested weight row of the wrong length.
    #[error("layers[{layer}].weights: row {row} has {found} values, but layout {layout} needs {expected} per row")]
    RowLength {
        /// 0-based layer index.
        layer: usize,
        /// 0-based row.
        row: usize,
        /// Values in that row.
        found: usize,
        /// Values needed.
        expected: usize,
        /// `out_in` or `in_out`.
        layout: &'static str,
    },
    /// A bias of the wrong length.
    #[error("layers[{layer}].bias: {found} values, but the layer has {expected} outputs")]
    BiasLength {
        /// 0-based layer index.
        layer: usize,
        /// Values given.
        found: usize,
        /// The layer's outputs.
        expected: usize,
    },
    /// A weight or bias that is NaN, infinite or too large for f32.
    #[error("layers[{layer}].{field}: {} at {position} is not a finite f32", crate::echo::number(*value))]
    NotFinite {
        /// 0-based layer index.
        layer: usize,
        /// `weights` or `bias`.
        field: &'static str,
        /// `output 2, input 3` or `output 2`.
        position: String,
        /// The value.
        value: f64,
    },
    /// An `.npy` file that could not be read.
    #[error("layers[{layer}].{field}: {}", path.display())]
    Npy {
        /// 0-based layer index.
        layer: usize,
        /// `weights` or `bias`.
        field: &'static str,
        /// The file, after resolving it against the description's directory.
        path: PathBuf,
        /// What went wrong.
        #[source]
        source: NpyArrayError,
    },
    /// An `.npy` file with a non-float element type.
    #[error("layers[{layer}].{field}: {}: element type {dtype}; weights and biases must be float32 or float64", path.display())]
    NpyDtype {
        /// 0-based layer index.
        layer: usize,
        /// `weights` or `bias`.
        field: &'static str,
        /// The file.
        path: PathBuf,
        /// Numpy's name for the type found.
        dtype: String,
    },
    /// An `.npy` file of the wrong shape.
    #[error("layers[{layer}].{field}: {}: shape {found:?}, but {what} needs {expected:?}", path.display())]
    NpyShape {
        /// 0-based layer index.
        layer: usize,
        /// `weights` or `bias`.
        field: &'static str,
        /// The file.
        path: PathBuf,
        /// Shape found.
        found: Vec<usize>,
        /// Shape needed.
        expected: Vec<usize>,
        /// What the shape is for, such as `layout in_out ([inputs, outputs])`.
        what: String,
    },
    /// A sigmoid output on a layer that does not have exactly one output.
    #[error("\"output\": \"sigmoid\" needs a last layer with 1 output (a binary classifier), but it has {0}; use \"softmax\" for several classes")]
    SigmoidOutputs(usize),
    /// A softmax over one output.
    #[error("\"output\": \"softmax\" over a single output is always 1; use \"sigmoid\" for a binary classifier")]
    SoftmaxSingle,
    /// Labels whose count differs from the classes.
    #[error("\"labels\" has {found} names, but the model has {expected} classes{note}")]
    LabelCount {
        /// Names given.
        found: usize,
        /// Classes.
        expected: usize,
        /// An explanation for sigmoid models.
        note: &'static str,
    },
    /// An empty label.
    #[error("labels[{0}] is empty")]
    EmptyLabel(usize),
    /// A label given twice.
    #[error("labels[{second}] repeats labels[{first}] ({label:?})")]
    DuplicateLabel {
        /// The repeated name.
        label: String,
        /// First occurrence.
        first: usize,
        /// Second occurrence.
        second: usize,
    },
    /// The `"scaler"` object is not valid.
    #[error("scaler")]
    Scaler(#[source] ScalerFileError),
}
