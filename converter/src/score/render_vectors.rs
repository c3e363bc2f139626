//! The results as test vectors: one line per row, every number as exact bits, so that a
//! device test can compare its own lines with these character for character.
//!
//! ```text
//! <name> <index:03> [label=<true class> ]class=<class> score=<f32 bits, 8 hex> out=<outputs>[ feat=<inputs>]
//! ```
//!
//! This is the line format of the firmware's vectors (`firmware-example/vectors/src/line.rs`,
//! committed in `tests/fixtures/vectors/`): `index` counts the lines from 0; `label=` is there
//! when the rows have labels; `class` is the entry point's class; `score` is `Model::infer`'s
//! score of its class; `out` lists the last layer's outputs before softmax (int8 values in
//! decimal, or f32 bit patterns in hex); `feat` (asked for with `with_inputs`) lists the row's
//! inputs (f32 bit patterns in hex, or the integers in decimal).
use anyhow::{bail, Result};
use std::fmt::Write;

use super::{LastOutputs, Rows, Scored};
use crate::dataset::IntegerValues;

/// How to write the lines.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct VectorOptions {
    /// The first word of every line (the set's name).
    pub name: String,
    /// Append ` feat=` and the row's inputs.
    pub with_inputs: bool,
}

/// Checks that `name` can be the first word of a line: not empty, no blank or control
/// character.
pub fn check_name(name: &str) -> Result<()> {
    if name.is_empty() {
        bail!("the vector set name is empty");
    }
    if let Some(c) = name.chars().find(|c| c.is_whitespace() || c.is_control()) {
        bail!(
            "the vector set name {} contains {c:?}; a name is the first word of each line, without blanks or control characters",
            crate::echo::quoted(name)
        );
    }
    Ok(())
}

fn list<T>(values: &[T], mut one: impl FnMut(&T) -> String) -> String {
    values.iter().map(&mut one).collect::<Vec<_>>().join(",")
}

/// Renders `s` (scored from `rows`) as vector lines.
pub fn render(s: &Scored, rows: &Rows, o: &VectorOptions) -> Result<String> {
    check_name(&o.name)?;
    let w = rows.data.width;
    let mut text = String::new();
    for (i, r) in s.rows.iter().enumerate() {
        let _ = write!(text, "{} {i:03} ", o.name);
        if let Some(t) = s.truth.as_ref().and_then(|t| t.get(i)) {
            let _ = write!(text, "label={t} ");
        }
        let out = match &r.outputs {
            LastOutputs::Int8(v) => list(v, i8::to_string),
            LastOutputs::F32(v) => list(v, |x| format!("{:08x}", x.to_bits())),
        };
        let _ = write!(
            text,
            "class={} score={:08x} out={out}",
            r.class,
            r.score.to_bits()
        );
        if o.with_inputs {
            let span = i * w..(i + 1) * w;
            let feat = match &rows.integers {
                None => list(rows.data.row(i), |x| format!("{:08x}", x.to_bits())),
                Some(IntegerValues::I16(v)) => list(v.get(span).unwrap_or(&[]), i16::to_string),
                Some(IntegerValues::U8(v)) => list(v.get(span).unwrap_or(&[]), u8::to_string),
            };
            let _ = write!(text, " feat={feat}");
        }
        text.push('\n');
    }
    Ok(text)
}
