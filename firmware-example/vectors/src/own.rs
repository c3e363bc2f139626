//! Test vectors of a model of your own: the expected lines carry their inputs.
//!
//! `kinglet score BLOB --data ROWS --feed F --format vectors --with-inputs` writes one line per
//! row (docs/score.md):
//!
//! ```text
//! <name> <index:03> [label=<true class> ]class=<class> score=<f32 bits> out=<outputs> feat=<inputs>
//! ```
//!
//! [`check_line`] reads the inputs back from `feat=` (f32 bit patterns for the `f32` feed,
//! decimal integers for `i16` and `u8`), runs them through the model on the target, writes the
//! line the target computes — class, score bits and last-layer outputs from this run, the name,
//! index, label and inputs as read — and says whether it equals the expected line character for
//! character. The firmware's `vectors` binary does this for the model and vectors given at build
//! time (`KINGLET_OWN_MODEL`, `KINGLET_OWN_VECTORS`, `KINGLET_OWN_FEED`; firmware README).
use crate::line::{run_traced, write_result, Line, VectorError, MAX_OUTPUTS};
use core::fmt::Write;
use kinglet_runtime::{Input, Model};

/// Most inputs a model of your own may take here.
pub const MAX_INPUTS: usize = 256;

/// The input type the firmware feeds (`kinglet score --feed`).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Feed {
    /// `Input::F32`: inputs written as f32 bit patterns.
    F32,
    /// `Input::I16`: inputs written as decimal integers.
    I16,
    /// `Input::U8`: inputs written as decimal integers.
    U8,
}

/// The inputs of one line, parsed into the feed's type. Only one lives at a time, on the stack
/// (no heap to box into), so the size gap between the variants costs nothing.
#[allow(clippy::large_enum_variant)]
enum Inputs {
    F32([f32; MAX_INPUTS]),
    I16([i16; MAX_INPUTS]),
    U8([u8; MAX_INPUTS]),
}

/// Parses the comma-separated `feat=` list into `feed`'s type; returns the inputs and count.
fn parse_inputs(list: &str, feed: Feed) -> Result<(Inputs, usize), VectorError> {
    let mut inputs = match feed {
        Feed::F32 => Inputs::F32([0.0; MAX_INPUTS]),
        Feed::I16 => Inputs::I16([0; MAX_INPUTS]),
        Feed::U8 => Inputs::U8([0; MAX_INPUTS]),
    };
    let mut n = 0;
    for (k, item) in list.split(',').enumerate() {
        if k >= MAX_INPUTS {
            return Err(VectorError::TooManyInputs);
        }
        let bad = VectorError::BadExpectedLine;
        match &mut inputs {
            Inputs::F32(v) => {
                let bits = u32::from_str_radix(item, 16).map_err(|_| bad)?;
                *v.get_mut(k).ok_or(bad)? = f32::from_bits(bits);
            }
            Inputs::I16(v) => *v.get_mut(k).ok_or(bad)? = item.parse().map_err(|_| bad)?,
            Inputs::U8(v) => *v.get_mut(k).ok_or(bad)? = item.parse().map_err(|_| bad)?,
        }
        n = k + 1;
    }
    Ok((inputs, n))
}

/// Runs the inputs of `expected` through `model` fed as `feed`, writes the target's line into
/// `line` and returns whether it equals `expected`. `scratch` needs `model.scratch_bytes()` bytes.
pub fn check_line(
    model: &Model<'_>,
    feed: Feed,
    expected: &str,
    scratch: &mut [u8],
    line: &mut Line,
) -> Result<bool, VectorError> {
    line.clear();
    let bad = VectorError::BadExpectedLine;
    let mut words = expected.split(' ');
    let name = words.next().ok_or(bad)?;
    let index = words.next().ok_or(bad)?;
    let mut label = None;
    let mut feat = None;
    for w in words {
        if let Some(l) = w.strip_prefix("label=") {
            label = Some(l);
        } else if let Some(f) = w.strip_prefix("feat=") {
            feat = Some(f);
        }
    }
    let feat = feat.ok_or(bad)?;
    let (inputs, n) = parse_inputs(feat, feed)?;
    let mut scores = [0f32; MAX_OUTPUTS];
    let run = match &inputs {
        Inputs::F32(v) => run_traced(
            model,
            Input::F32(v.get(..n).ok_or(bad)?),
            scratch,
            &mut scores,
        ),
        Inputs::I16(v) => run_traced(
            model,
            Input::I16(v.get(..n).ok_or(bad)?),
            scratch,
            &mut scores,
        ),
        Inputs::U8(v) => run_traced(
            model,
            Input::U8(v.get(..n).ok_or(bad)?),
            scratch,
            &mut scores,
        ),
    };
    let (prediction, outputs) = run?;
    write!(line, "{name} {index} ")?;
    if let Some(l) = label {
        write!(line, "label={l} ")?;
    }
    write_result(line, &prediction, &outputs, model.output_len())?;
    line.push_str(" feat=")
        .map_err(|_| VectorError::LineTooLong)?;
    for k in 0..n {
        let sep = if k == 0 { "" } else { "," };
        match &inputs {
            Inputs::F32(v) => write!(line, "{sep}{:08x}", v.get(k).ok_or(bad)?.to_bits())?,
            Inputs::I16(v) => write!(line, "{sep}{}", v.get(k).ok_or(bad)?)?,
            Inputs::U8(v) => write!(line, "{sep}{}", v.get(k).ok_or(bad)?)?,
        }
    }
    Ok(line.as_str() == expected)
}

#[cfg(test)]
#[allow(clippy::unwrap_used)]
mod tests {
    use super::*;
    use crate::assets::{VIBRATION, VIBRATION_SCRATCH};

    /// The committed vibration vectors carry their inputs: every line must check out on the
    /// host too (this is the same code the firmware runs).
    #[test]
    fn committed_vibration_lines_check_out() {
        let model = Model::parse(VIBRATION).unwrap();
        let mut scratch = [0u8; VIBRATION_SCRATCH];
        let mut line = Line::new();
        let text = include_str!("../../../tests/fixtures/vectors/vibration.txt");
        let mut n = 0;
        for want in text.lines() {
            assert!(
                check_line(&model, Feed::F32, want, &mut scratch, &mut line).unwrap(),
                "{want}\n{line}"
            );
            n += 1;
        }
        assert_eq!(n, 64);
    }

    #[test]
    fn a_changed_output_is_a_mismatch() {
        let model = Model::parse(VIBRATION).unwrap();
        let mut scratch = [0u8; VIBRATION_SCRATCH];
        let mut line = Line::new();
        let text = include_str!("../../../tests/fixtures/vectors/vibration.txt");
        let first = text.lines().next().unwrap();
        let changed = first.replacen("class=1", "class=2", 1);
        assert!(!check_line(&model, Feed::F32, &changed, &mut scratch, &mut line).unwrap());
        assert_eq!(line.as_str(), first);
    }

    #[test]
    fn a_line_without_inputs_is_refused() {
        let model = Model::parse(VIBRATION).unwrap();
        let mut scratch = [0u8; VIBRATION_SCRATCH];
        let mut line = Line::new();
        let text = include_str!("../../../tests/fixtures/vectors/digits_u8.txt");
        let first = text.lines().next().unwrap();
        assert_eq!(
            check_line(&model, Feed::U8, first, &mut scratch, &mut line),
            Err(VectorError::BadExpectedLine)
        );
        let bad = "x 000 class=0 score=0 out=0 feat=zz";
        assert_eq!(
            check_line(&model, Feed::F32, bad, &mut scratch, &mut line),
            Err(VectorError::BadExpectedLine)
        );
    }
}
