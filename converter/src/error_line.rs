//! The one error convention of the converter: an error's `Display` says what went wrong at its
//! own level only and never repeats its cause; the cause is its `source()`. The whole story is
//! the chain, outermost first, joined by `: ` and printed once, by [`one_line`]. (`anyhow`'s
//! `{:#}` prints the same line.)
use std::error::Error;

/// `e` and every cause under it on one line, outermost first: `a.csv: cannot read the file: No
/// such file or directory (os error 2)`.
pub fn one_line(e: &(dyn Error + 'static)) -> String {
    let mut line = e.to_string();
    let mut cause = e.source();
    while let Some(c) = cause {
        line.push_str(": ");
        line.push_str(&c.to_string());
        cause = c.source();
    }
    line
}

/// [`one_line`] as a method: `err.line()`.
pub trait ErrorLine {
    /// The error and its causes on one line.
    fn line(&self) -> String;
}

impl<E: Error + 'static> ErrorLine for E {
    fn line(&self) -> String {
        one_line(self)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::dataset::{load_csv, CsvOptions};
    use crate::import::plain::import_plain_str;
    use crate::scaler_file::parse_scaler_json;

    /// No part of the line is printed twice: the convention's whole point.
    fn assert_no_repeats(line: &str) {
        let parts: Vec<&str> = line.split(": ").collect();
        for (i, p) in parts.iter().enumerate() {
            assert!(
                p.len() <= 8 || !parts[i + 1..].contains(p),
                "{p:?} repeated in {line:?}"
            );
        }
    }

    #[test]
    fn chains_print_each_cause_once() {
        let dir = tempfile::tempdir().unwrap();
        let missing = dir.path().join("nowhere.csv");
        let e = load_csv(&missing, &CsvOptions::default()).unwrap_err();
        let line = one_line(&e);
        assert!(
            line.ends_with(
                "nowhere.csv: cannot read the file: No such file or directory (os error 2)"
            ),
            "{line}"
        );
        assert_no_repeats(&line);

        let e = import_plain_str(
            r#"{"kinglet_model": 1, "input_width": 2, "layers": [{"inputs": 2, "outputs": 1, "activation": "relu", "weights": {"layout": "in_out", "npy": "gone.npy"}, "bias": [0]}], "output": "sigmoid"}"#,
            dir.path(),
        )
        .unwrap_err();
        let line = one_line(&e);
        assert!(
            line.contains("layers[0].weights")
                && line.contains("cannot read the file: No such file"),
            "{line}"
        );
        assert_no_repeats(&line);

        let e = parse_scaler_json("{\"mean\": [1], \"std\": [}").unwrap_err();
        let line = one_line(&e);
        assert!(line.starts_with("not valid JSON: "), "{line}");
        assert_no_repeats(&line);
    }
}
