//! Turning the labels written in a dataset into class indices.

use super::DatasetError;

/// Maps each label to a class index.
///
/// A label is a class name from `class_names` (when it is non-empty; names are matched exactly
/// after trimming spaces and take priority) or an integer class index in `0..classes` (written
/// as `2` or, as pandas writes integer columns that held a missing value, `2.0`). The error names
/// the 1-based data row (header not counted).
pub fn resolve_labels(
    labels: &[String],
    class_names: &[String],
    classes: usize,
) -> Result<Vec<usize>, DatasetError> {
    labels
        .iter()
        .enumerate()
        .map(|(i, raw)| {
            let label = raw.trim();
            if let Some(k) = class_names.iter().position(|n| n.trim() == label) {
                return Ok(k);
            }
            match parse_index(label) {
                Some(k) if k < classes => Ok(k),
                _ => Err(DatasetError::UnknownLabel {
                    row: i + 1,
                    label: raw.clone(),
                    expected: expected_text(class_names, classes),
                }),
            }
        })
        .collect()
}

/// `"2"` or `"2.0"` as an index; anything else (negative, fractional, text) is `None`.
fn parse_index(s: &str) -> Option<usize> {
    if let Ok(k) = s.parse::<usize>() {
        return Some(k);
    }
    let v = s.parse::<f64>().ok()?;
    if v.is_finite() && v >= 0.0 && v.fract() == 0.0 && v < 1e15 {
        Some(v as usize)
    } else {
        None
    }
}

fn expected_text(class_names: &[String], classes: usize) -> String {
    let range = if classes == 0 {
        "the model has no classes".to_string()
    } else {
        format!("0 to {}", classes - 1)
    };
    if class_names.is_empty() {
        format!("not a class index ({range})")
    } else {
        let names: Vec<String> = class_names.iter().map(|n| format!("{n:?}")).collect();
        format!(
            "neither a class name ({}) nor a class index ({range})",
            names.join(", ")
        )
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn s(v: &[&str]) -> Vec<String> {
        v.iter().map(|x| x.to_string()).collect()
    }

    #[test]
    fn names_and_indices() {
        let names = s(&["cat", "dog", "bird"]);
        let got = resolve_labels(&s(&["dog", "0", " bird ", "2.0"]), &names, 3).unwrap();
        assert_eq!(got, vec![1, 0, 2, 2]);
    }

    #[test]
    fn names_take_priority_over_indices() {
        // Class names that are themselves numbers, in another order.
        let names = s(&["1", "0"]);
        assert_eq!(
            resolve_labels(&s(&["1", "0"]), &names, 2).unwrap(),
            vec![0, 1]
        );
    }

    #[test]
    fn indices_without_names() {
        assert_eq!(resolve_labels(&s(&["2", "1"]), &[], 3).unwrap(), vec![2, 1]);
    }

    #[test]
    fn out_of_range_index_names_the_row() {
        let e = resolve_labels(&s(&["0", "1", "3"]), &[], 3)
            .unwrap_err()
            .to_string();
        assert_eq!(
            e,
            "data row 3 (1-based, header not counted): label \"3\" is not a class index (0 to 2)"
        );
    }

    #[test]
    fn unknown_name_lists_the_classes() {
        let e = resolve_labels(&s(&["cat", "cow"]), &s(&["cat", "dog"]), 2).unwrap_err();
        let msg = e.to_string();
        assert!(msg.starts_with("data row 2 "), "{msg}");
        assert!(msg.contains("\"cow\""), "{msg}");
        assert!(msg.contains("\"cat\", \"dog\""), "{msg}");
    }

    #[test]
    fn negative_and_fractional_are_rejected() {
        assert!(resolve_labels(&s(&["-1"]), &[], 3).is_err());
        assert!(resolve_labels(&s(&["1.5"]), &[], 3).is_err());
        assert!(resolve_labels(&s(&["NaN"]), &[], 3).is_err());
        assert!(resolve_labels(&s(&[""]), &[], 3).is_err());
    }
}
