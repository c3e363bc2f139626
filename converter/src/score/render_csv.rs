//! The results as CSV: a header, then one record per row in input order.
//!
//! `row` is the data row of the input (0-based, header not counted); `class` the entry point's
//! class, `label` its name in the blob (empty when the blob has none); `truth` the row's true
//! class, when the rows have labels; `score_k` the scores `Model::infer` wrote; `out_k` the last
//! layer's raw outputs (int8 integers, or f32 values for an f32 blob).
//!
//! Every f32 is printed as the shortest decimal of its exact value widened to f64, so it reads
//! back as exactly the same number whether the reader parses f32 or f64.
use anyhow::{Context, Result};

use super::{LastOutputs, Scored};

/// An f32 as the shortest decimal that reads back exactly as f32 and as f64: plain in the usual
/// range, in scientific notation when tiny or huge (`6.4e-26`, not 25 zeros).
pub fn exact(x: f32) -> String {
    let v = f64::from(x);
    if v == 0.0 || (1e-4..1e16).contains(&v.abs()) {
        format!("{v}")
    } else {
        format!("{v:e}")
    }
}

/// Renders `s` as CSV text.
pub fn render(s: &Scored) -> Result<String> {
    let n = s.rows.first().map_or(0, |r| r.scores.len());
    let mut w = csv::Writer::from_writer(Vec::new());
    let mut header: Vec<String> = vec!["row".into(), "class".into(), "label".into()];
    if s.truth.is_some() {
        header.push("truth".into());
    }
    header.extend((0..n).map(|k| format!("score_{k}")));
    header.extend((0..n).map(|k| format!("out_{k}")));
    w.write_record(&header).context("cannot format the CSV")?;
    for (i, r) in s.rows.iter().enumerate() {
        let mut rec: Vec<String> = vec![
            (s.first_row + i).to_string(),
            r.class.to_string(),
            s.class_name(r.class).unwrap_or("").to_string(),
        ];
        if let Some(t) = &s.truth {
            rec.push(t.get(i).map_or(String::new(), usize::to_string));
        }
        rec.extend(r.scores.iter().map(|&x| exact(x)));
        match &r.outputs {
            LastOutputs::Int8(v) => rec.extend(v.iter().map(i8::to_string)),
            LastOutputs::F32(v) => rec.extend(v.iter().map(|&x| exact(x))),
        }
        w.write_record(&rec).context("cannot format the CSV")?;
    }
    let bytes = w.into_inner().context("cannot format the CSV")?;
    String::from_utf8(bytes).context("cannot format the CSV")
}

#[cfg(test)]
mod tests {
    use super::exact;

    #[test]
    fn floats_read_back_exactly_as_f32_and_f64() {
        for x in [
            0.1f32,
            0.963_826_5,
            6.4e-26,
            1e-4,
            3e38,
            -2.5,
            0.0,
            f32::MIN_POSITIVE,
            1.0e-45,
        ] {
            let s = exact(x);
            assert_eq!(s.parse::<f32>().unwrap().to_bits(), x.to_bits(), "{s}");
            assert_eq!(s.parse::<f64>().unwrap(), f64::from(x), "{s}");
        }
        assert_eq!(exact(0.5), "0.5");
        assert_eq!(exact(6.4e-26), format!("{:e}", f64::from(6.4e-26f32)));
    }
}
