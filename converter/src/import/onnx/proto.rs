//! Hand-written `prost` message types for the part of `onnx.proto` (proto2, package `onnx`) that
//! the importer reads. Field numbers follow the official `onnx.proto`; fields the importer does
//! not need (sub-graphs, sparse tensors, training info, metadata, ...) are left out and skipped by
//! the decoder as unknown fields. Leaving out `AttributeProto.g`/`graphs` also keeps these types
//! free of recursion.
//!
//! Written by hand rather than generated so that no `protoc` is needed at build time.

/// `onnx.ModelProto`: the top-level file message.
#[derive(Clone, PartialEq, prost::Message)]
pub struct ModelProto {
    /// IR version of the file format.
    #[prost(int64, optional, tag = "1")]
    pub ir_version: Option<i64>,
    /// Name of the tool that wrote the file.
    #[prost(string, optional, tag = "2")]
    pub producer_name: Option<String>,
    /// Version of that tool.
    #[prost(string, optional, tag = "3")]
    pub producer_version: Option<String>,
    /// The model's graph.
    #[prost(message, optional, tag = "7")]
    pub graph: Option<GraphProto>,
    /// Operator sets the graph uses.
    #[prost(message, repeated, tag = "8")]
    pub opset_import: Vec<OperatorSetIdProto>,
}

/// `onnx.OperatorSetIdProto`: one imported operator set.
#[derive(Clone, PartialEq, prost::Message)]
pub struct OperatorSetIdProto {
    /// Operator set domain ("" or "ai.onnx" for the default set).
    #[prost(string, optional, tag = "1")]
    pub domain: Option<String>,
    /// Operator set version.
    #[prost(int64, optional, tag = "2")]
    pub version: Option<i64>,
}

/// `onnx.GraphProto`: nodes, constant initializers, inputs and outputs.
#[derive(Clone, PartialEq, prost::Message)]
pub struct GraphProto {
    /// Nodes, nominally in topological order.
    #[prost(message, repeated, tag = "1")]
    pub node: Vec<NodeProto>,
    /// Graph name.
    #[prost(string, optional, tag = "2")]
    pub name: Option<String>,
    /// Constant tensors (weights, biases, shapes, class labels).
    #[prost(message, repeated, tag = "5")]
    pub initializer: Vec<TensorProto>,
    /// Graph inputs (older files also list initializers here).
    #[prost(message, repeated, tag = "11")]
    pub input: Vec<ValueInfoProto>,
    /// Graph outputs.
    #[prost(message, repeated, tag = "12")]
    pub output: Vec<ValueInfoProto>,
}

/// `onnx.NodeProto`: one operator application.
#[derive(Clone, PartialEq, prost::Message)]
pub struct NodeProto {
    /// Names of input values ("" marks an omitted optional input).
    #[prost(string, repeated, tag = "1")]
    pub input: Vec<String>,
    /// Names of output values ("" marks an omitted optional output).
    #[prost(string, repeated, tag = "2")]
    pub output: Vec<String>,
    /// Node name (may be empty).
    #[prost(string, optional, tag = "3")]
    pub name: Option<String>,
    /// Operator name, such as `Gemm`.
    #[prost(string, optional, tag = "4")]
    pub op_type: Option<String>,
    /// Attributes.
    #[prost(message, repeated, tag = "5")]
    pub attribute: Vec<AttributeProto>,
    /// Operator domain ("" or "ai.onnx" for the default set, "ai.onnx.ml" for the ML set).
    #[prost(string, optional, tag = "7")]
    pub domain: Option<String>,
}

/// `onnx.AttributeProto`, without the sub-graph, sparse-tensor and type-proto fields.
#[derive(Clone, PartialEq, prost::Message)]
pub struct AttributeProto {
    /// Attribute name.
    #[prost(string, optional, tag = "1")]
    pub name: Option<String>,
    /// Single float.
    #[prost(float, optional, tag = "2")]
    pub f: Option<f32>,
    /// Single integer.
    #[prost(int64, optional, tag = "3")]
    pub i: Option<i64>,
    /// Single string (bytes, UTF-8 by convention).
    #[prost(bytes = "vec", optional, tag = "4")]
    pub s: Option<Vec<u8>>,
    /// Single tensor.
    #[prost(message, optional, tag = "5")]
    pub t: Option<TensorProto>,
    /// List of floats.
    #[prost(float, repeated, tag = "7")]
    pub floats: Vec<f32>,
    /// List of integers.
    #[prost(int64, repeated, tag = "8")]
    pub ints: Vec<i64>,
    /// List of strings.
    #[prost(bytes = "vec", repeated, tag = "9")]
    pub strings: Vec<Vec<u8>>,
    /// `AttributeProto.AttributeType` discriminator (see [`attr_type`]).
    #[prost(int32, optional, tag = "20")]
    pub r#type: Option<i32>,
}

/// Values of `AttributeProto.AttributeType` the importer tells apart.
pub mod attr_type {
    /// `FLOAT`.
    pub const FLOAT: i32 = 1;
    /// `INT`.
    pub const INT: i32 = 2;
    /// `STRING`.
    pub const STRING: i32 = 3;
    /// `TENSOR`.
    pub const TENSOR: i32 = 4;
    /// `FLOATS`.
    pub const FLOATS: i32 = 6;
    /// `INTS`.
    pub const INTS: i32 = 7;
    /// `STRINGS`.
    pub const STRINGS: i32 = 8;
}

/// `onnx.TensorProto`, without segments and metadata.
#[derive(Clone, PartialEq, prost::Message)]
pub struct TensorProto {
    /// Shape.
    #[prost(int64, repeated, tag = "1")]
    pub dims: Vec<i64>,
    /// `TensorProto.DataType` (see [`data_type`]).
    #[prost(int32, optional, tag = "2")]
    pub data_type: Option<i32>,
    /// FLOAT values (also COMPLEX64, unused here).
    #[prost(float, repeated, tag = "4")]
    pub float_data: Vec<f32>,
    /// INT32, INT16, INT8, UINT16, UINT8, BOOL (and FLOAT16 bit patterns) values.
    #[prost(int32, repeated, tag = "5")]
    pub int32_data: Vec<i32>,
    /// STRING values.
    #[prost(bytes = "vec", repeated, tag = "6")]
    pub string_data: Vec<Vec<u8>>,
    /// INT64 values.
    #[prost(int64, repeated, tag = "7")]
    pub int64_data: Vec<i64>,
    /// Tensor name.
    #[prost(string, optional, tag = "8")]
    pub name: Option<String>,
    /// Values as packed little-endian bytes (any fixed-size type).
    #[prost(bytes = "vec", optional, tag = "9")]
    pub raw_data: Option<Vec<u8>>,
    /// DOUBLE values.
    #[prost(double, repeated, tag = "10")]
    pub double_data: Vec<f64>,
    /// UINT32 and UINT64 values.
    #[prost(uint64, repeated, tag = "11")]
    pub uint64_data: Vec<u64>,
    /// Where to find external data (only the location flag is read, to reject it).
    #[prost(message, repeated, tag = "13")]
    pub external_data: Vec<StringStringEntryProto>,
    /// `DataLocation`: 0 = in this message, 1 = in an external file.
    #[prost(int32, optional, tag = "14")]
    pub data_location: Option<i32>,
}

/// Values of `TensorProto.DataType` the importer tells apart.
pub mod data_type {
    /// `FLOAT` (f32).
    pub const FLOAT: i32 = 1;
    /// `UINT8`.
    pub const UINT8: i32 = 2;
    /// `INT8`.
    pub const INT8: i32 = 3;
    /// `UINT16`.
    pub const UINT16: i32 = 4;
    /// `INT16`.
    pub const INT16: i32 = 5;
    /// `INT32`.
    pub const INT32: i32 = 6;
    /// `INT64`.
    pub const INT64: i32 = 7;
    /// `STRING`.
    pub const STRING: i32 = 8;
    /// `BOOL`.
    pub const BOOL: i32 = 9;
    /// `FLOAT16`.
    pub const FLOAT16: i32 = 10;
    /// `DOUBLE` (f64).
    pub const DOUBLE: i32 = 11;
    /// `UINT32`.
    pub const UINT32: i32 = 12;
    /// `UINT64`.
    pub const UINT64: i32 = 13;

    /// The `onnx.proto` name of a data type, for messages.
    pub fn name(dt: i32) -> &'static str {
        match dt {
            0 => "UNDEFINED",
            FLOAT => "FLOAT",
            UINT8 => "UINT8",
            INT8 => "INT8",
            UINT16 => "UINT16",
            INT16 => "INT16",
            INT32 => "INT32",
            INT64 => "INT64",
            STRING => "STRING",
            BOOL => "BOOL",
            FLOAT16 => "FLOAT16",
            DOUBLE => "DOUBLE",
            UINT32 => "UINT32",
            UINT64 => "UINT64",
            14 => "COMPLEX64",
            15 => "COMPLEX128",
            16 => "BFLOAT16",
            17..=20 | 24 => "FLOAT8",
            21 | 22 | 25 | 26 => "small integer (2/4-bit)",
            23 | 27 | 28 => "small float (4/6-bit)",
            _ => "unknown",
        }
    }
}

/// `onnx.StringStringEntryProto`: a key/value pair.
#[derive(Clone, PartialEq, prost::Message)]
pub struct StringStringEntryProto {
    /// Key.
    #[prost(string, optional, tag = "1")]
    pub key: Option<String>,
    /// Value.
    #[prost(string, optional, tag = "2")]
    pub value: Option<String>,
}

/// `onnx.ValueInfoProto`: a named, typed value (graph input or output).
#[derive(Clone, PartialEq, prost::Message)]
pub struct ValueInfoProto {
    /// Value name.
    #[prost(string, optional, tag = "1")]
    pub name: Option<String>,
    /// Value type.
    #[prost(message, optional, tag = "2")]
    pub r#type: Option<TypeProto>,
}

/// `onnx.TypeProto`; only the `tensor_type` member of its `value` oneof is read.
#[derive(Clone, PartialEq, prost::Message)]
pub struct TypeProto {
    /// Dense tensor type.
    #[prost(message, optional, tag = "1")]
    pub tensor_type: Option<TypeProtoTensor>,
}

/// `onnx.TypeProto.Tensor`: element type and shape.
#[derive(Clone, PartialEq, prost::Message)]
pub struct TypeProtoTensor {
    /// Element type (a `TensorProto.DataType`).
    #[prost(int32, optional, tag = "1")]
    pub elem_type: Option<i32>,
    /// Shape, if known.
    #[prost(message, optional, tag = "2")]
    pub shape: Option<TensorShapeProto>,
}

/// `onnx.TensorShapeProto`.
#[derive(Clone, PartialEq, prost::Message)]
pub struct TensorShapeProto {
    /// Dimensions, outermost first.
    #[prost(message, repeated, tag = "1")]
    pub dim: Vec<Dimension>,
}

/// `onnx.TensorShapeProto.Dimension`; the `value` oneof is read as two optional fields, which
/// is the same on the wire.
#[derive(Clone, PartialEq, prost::Message)]
pub struct Dimension {
    /// A fixed size.
    #[prost(int64, optional, tag = "1")]
    pub dim_value: Option<i64>,
    /// A symbolic size (such as a batch dimension `N`).
    #[prost(string, optional, tag = "2")]
    pub dim_param: Option<String>,
}
