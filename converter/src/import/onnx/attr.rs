//! Reading node attributes by name, checking their declared type. Files from older writers may
//! omit the `type` discriminator; then the value fields that are set decide.

use super::proto::{attr_type as at, AttributeProto, NodeProto};
use super::tensor::{decode, Tensor};

/// Finds an attribute by name.
pub fn find<'n>(node: &'n NodeProto, name: &str) -> Option<&'n AttributeProto> {
    node.attribute
        .iter()
        .find(|a| a.name.as_deref() == Some(name))
}

fn type_name(t: i32) -> &'static str {
    match t {
        at::FLOAT => "FLOAT",
        at::INT => "INT",
        at::STRING => "STRING",
        at::TENSOR => "TENSOR",
        at::FLOATS => "FLOATS",
        at::INTS => "INTS",
        at::STRINGS => "STRINGS",
        5 => "GRAPH",
        9 => "TENSORS",
        10 => "GRAPHS",
        _ => "another type",
    }
}

/// Errors unless the attribute's declared type (if any) is one of `allowed`.
fn check_type(a: &AttributeProto, allowed: &[i32], want: &str) -> Result<(), String> {
    match a.r#type {
        Some(t) if t != 0 && !allowed.contains(&t) => Err(format!(
            "attribute '{}' is {}, expected {want}",
            a.name.as_deref().unwrap_or(""),
            type_name(t)
        )),
        _ => Ok(()),
    }
}

/// An INT attribute, if present.
pub fn int(node: &NodeProto, name: &str) -> Result<Option<i64>, String> {
    let Some(a) = find(node, name) else {
        return Ok(None);
    };
    check_type(a, &[at::INT], "INT")?;
    a.i.map(Some)
        .ok_or_else(|| format!("attribute '{name}' has no integer value"))
}

/// An INT attribute or its default.
pub fn int_or(node: &NodeProto, name: &str, default: i64) -> Result<i64, String> {
    Ok(int(node, name)?.unwrap_or(default))
}

/// A FLOAT attribute, if present.
pub fn float(node: &NodeProto, name: &str) -> Result<Option<f32>, String> {
    let Some(a) = find(node, name) else {
        return Ok(None);
    };
    check_type(a, &[at::FLOAT], "FLOAT")?;
    a.f.map(Some)
        .ok_or_else(|| format!("attribute '{name}' has no float value"))
}

/// A FLOAT attribute or its default.
pub fn float_or(node: &NodeProto, name: &str, default: f32) -> Result<f32, String> {
    Ok(float(node, name)?.unwrap_or(default))
}

/// A list of floats, accepting both a FLOATS list and a single FLOAT (as a list of one).
pub fn floats(node: &NodeProto, name: &str) -> Result<Option<Vec<f32>>, String> {
    let Some(a) = find(node, name) else {
        return Ok(None);
    };
    check_type(a, &[at::FLOATS, at::FLOAT], "FLOATS or FLOAT")?;
    let single = a.r#type == Some(at::FLOAT) || (a.floats.is_empty() && a.f.is_some());
    if single {
        return a
            .f
            .map(|f| Some(vec![f]))
            .ok_or_else(|| format!("attribute '{name}' has no float value"));
    }
    Ok(Some(a.floats.clone()))
}

/// A list of ints, accepting both an INTS list and a single INT.
pub fn ints(node: &NodeProto, name: &str) -> Result<Option<Vec<i64>>, String> {
    let Some(a) = find(node, name) else {
        return Ok(None);
    };
    check_type(a, &[at::INTS, at::INT], "INTS or INT")?;
    let single = a.r#type == Some(at::INT) || (a.ints.is_empty() && a.i.is_some());
    if single {
        return a
            .i
            .map(|i| Some(vec![i]))
            .ok_or_else(|| format!("attribute '{name}' has no integer value"));
    }
    Ok(Some(a.ints.clone()))
}

/// A list of strings, accepting both a STRINGS list and a single STRING.
pub fn strings(node: &NodeProto, name: &str) -> Result<Option<Vec<String>>, String> {
    let Some(a) = find(node, name) else {
        return Ok(None);
    };
    check_type(a, &[at::STRINGS, at::STRING], "STRINGS or STRING")?;
    let single = a.r#type == Some(at::STRING) || (a.strings.is_empty() && a.s.is_some());
    let text = |b: &Vec<u8>| String::from_utf8_lossy(b).into_owned();
    if single {
        return a
            .s
            .as_ref()
            .map(|s| Some(vec![text(s)]))
            .ok_or_else(|| format!("attribute '{name}' has no string value"));
    }
    Ok(Some(a.strings.iter().map(text).collect()))
}

/// A TENSOR attribute, decoded, if present.
pub fn tensor(node: &NodeProto, name: &str) -> Result<Option<Tensor>, String> {
    let Some(a) = find(node, name) else {
        return Ok(None);
    };
    check_type(a, &[at::TENSOR], "TENSOR")?;
    let t =
        a.t.as_ref()
            .ok_or_else(|| format!("attribute '{name}' has no tensor value"))?;
    decode(t).map(Some)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::import::onnx::proto::{data_type, TensorProto};

    fn node(attrs: Vec<AttributeProto>) -> NodeProto {
        NodeProto {
            attribute: attrs,
            ..Default::default()
        }
    }

    fn attr(name: &str, ty: Option<i32>) -> AttributeProto {
        AttributeProto {
            name: Some(name.into()),
            r#type: ty,
            ..Default::default()
        }
    }

    #[test]
    fn ints_and_floats_by_name_with_defaults() {
        let n = node(vec![
            AttributeProto {
                i: Some(1),
                ..attr("transB", Some(at::INT))
            },
            AttributeProto {
                f: Some(0.5),
                ..attr("alpha", Some(at::FLOAT))
            },
        ]);
        assert_eq!(int(&n, "transB").unwrap(), Some(1));
        assert_eq!(int_or(&n, "transA", 0).unwrap(), 0);
        assert_eq!(float_or(&n, "alpha", 1.0).unwrap(), 0.5);
        assert_eq!(float_or(&n, "beta", 1.0).unwrap(), 1.0);
    }

    #[test]
    fn float_lists_accept_list_and_single() {
        let n = node(vec![
            AttributeProto {
                floats: vec![1.0, 2.0],
                ..attr("scale", Some(at::FLOATS))
            },
            AttributeProto {
                f: Some(3.0),
                ..attr("offset", Some(at::FLOAT))
            },
            // No type discriminator (older writers): decided by the field that is set.
            AttributeProto {
                floats: vec![4.0],
                ..attr("untyped", None)
            },
            AttributeProto {
                f: Some(5.0),
                ..attr("untyped1", None)
            },
        ]);
        assert_eq!(floats(&n, "scale").unwrap(), Some(vec![1.0, 2.0]));
        assert_eq!(floats(&n, "offset").unwrap(), Some(vec![3.0]));
        assert_eq!(floats(&n, "untyped").unwrap(), Some(vec![4.0]));
        assert_eq!(floats(&n, "untyped1").unwrap(), Some(vec![5.0]));
        assert_eq!(floats(&n, "missing").unwrap(), None);
    }

    #[test]
    fn int_lists_strings_and_tensors() {
        let t = TensorProto {
            dims: vec![1],
            data_type: Some(data_type::FLOAT),
            float_data: vec![2.0],
            ..Default::default()
        };
        let n = node(vec![
            AttributeProto {
                ints: vec![0, -1],
                ..attr("shape", Some(at::INTS))
            },
            AttributeProto {
                strings: vec![b"a".to_vec(), b"b".to_vec()],
                ..attr("names", Some(at::STRINGS))
            },
            AttributeProto {
                t: Some(t),
                ..attr("value", Some(at::TENSOR))
            },
        ]);
        assert_eq!(ints(&n, "shape").unwrap(), Some(vec![0, -1]));
        assert_eq!(
            strings(&n, "names").unwrap(),
            Some(vec!["a".to_string(), "b".to_string()])
        );
        assert_eq!(
            tensor(&n, "value")
                .unwrap()
                .unwrap()
                .finite_floats()
                .unwrap(),
            &[2.0]
        );
    }

    #[test]
    fn wrong_type_is_reported() {
        let n = node(vec![AttributeProto {
            floats: vec![1.0],
            ..attr("axis", Some(at::FLOATS))
        }]);
        let e = int(&n, "axis").unwrap_err();
        assert_eq!(e, "attribute 'axis' is FLOATS, expected INT");
        let m = node(vec![attr("alpha", Some(at::FLOAT))]);
        assert!(float(&m, "alpha").unwrap_err().contains("no float value"));
    }
}
