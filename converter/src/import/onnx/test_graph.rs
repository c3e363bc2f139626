//! Builders for small in-memory ONNX graphs used by the unit tests.

use prost::Message;

use super::proto::*;

pub fn floats(name: &str, dims: &[i64], v: &[f32]) -> TensorProto {
    TensorProto {
        name: Some(name.into()),
        dims: dims.to_vec(),
        data_type: Some(data_type::FLOAT),
        float_data: v.to_vec(),
        ..Default::default()
    }
}

pub fn int64s(name: &str, dims: &[i64], v: &[i64]) -> TensorProto {
    TensorProto {
        name: Some(name.into()),
        dims: dims.to_vec(),
        data_type: Some(data_type::INT64),
        int64_data: v.to_vec(),
        ..Default::default()
    }
}

pub fn node(name: &str, op: &str, inputs: &[&str], outputs: &[&str]) -> NodeProto {
    NodeProto {
        name: Some(name.into()),
        op_type: Some(op.into()),
        input: inputs.iter().map(|s| s.to_string()).collect(),
        output: outputs.iter().map(|s| s.to_string()).collect(),
        ..Default::default()
    }
}

pub fn with_attr(mut n: NodeProto, a: AttributeProto) -> NodeProto {
    n.attribute.push(a);
    n
}

pub fn attr_int(name: &str, i: i64) -> AttributeProto {
    AttributeProto {
        name: Some(name.into()),
        i: Some(i),
        r#type: Some(attr_type::INT),
        ..Default::default()
    }
}

pub fn attr_float(name: &str, f: f32) -> AttributeProto {
    AttributeProto {
        name: Some(name.into()),
        f: Some(f),
        r#type: Some(attr_type::FLOAT),
        ..Default::default()
    }
}

pub fn attr_floats(name: &str, v: &[f32]) -> AttributeProto {
    AttributeProto {
        name: Some(name.into()),
        floats: v.to_vec(),
        r#type: Some(attr_type::FLOATS),
        ..Default::default()
    }
}

/// A float value info; a dim of 0 is written as the symbolic batch `N`.
pub fn value(name: &str, dims: &[i64]) -> ValueInfoProto {
    let dim = dims
        .iter()
        .map(|&d| {
            if d == 0 {
                Dimension {
                    dim_param: Some("N".into()),
                    ..Default::default()
                }
            } else {
                Dimension {
                    dim_value: Some(d),
                    ..Default::default()
                }
            }
        })
        .collect();
    ValueInfoProto {
        name: Some(name.into()),
        r#type: Some(TypeProto {
            tensor_type: Some(TypeProtoTensor {
                elem_type: Some(data_type::FLOAT),
                shape: Some(TensorShapeProto { dim }),
            }),
        }),
    }
}

pub fn graph(
    nodes: Vec<NodeProto>,
    inits: Vec<TensorProto>,
    inputs: Vec<ValueInfoProto>,
    outputs: &[&str],
) -> GraphProto {
    GraphProto {
        node: nodes,
        name: Some("g".into()),
        initializer: inits,
        input: inputs,
        output: outputs
            .iter()
            .map(|o| ValueInfoProto {
                name: Some(o.to_string()),
                r#type: None,
            })
            .collect(),
    }
}

pub fn model_bytes(g: GraphProto) -> Vec<u8> {
    ModelProto {
        ir_version: Some(8),
        producer_name: Some("unit-test".into()),
        producer_version: None,
        graph: Some(g),
        opset_import: vec![OperatorSetIdProto {
            domain: Some(String::new()),
            version: Some(13),
        }],
    }
    .encode_to_vec()
}
