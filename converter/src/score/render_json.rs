//! The results as JSON: what was run, then one object per row in input order (the fields of
//! [`super::render_csv`], with `scores` and `outputs` as arrays and `label` / `truth` `null`
//! when absent). Floats are exact, as in the CSV.
use anyhow::Result;
use serde::Serialize;

use super::{precision_name, Entry, Feed, LastOutputs, Scored};
use crate::vet::pair::output_name;

#[derive(Serialize)]
struct Row<'a> {
    row: usize,
    class: usize,
    label: Option<&'a str>,
    truth: Option<usize>,
    scores: Vec<f64>,
    outputs: Outputs,
}

#[derive(Serialize)]
#[serde(untagged)]
enum Outputs {
    Int8(Vec<i8>),
    F32(Vec<f64>),
}

#[derive(Serialize)]
struct Document<'a> {
    blob: &'a str,
    data: &'a str,
    precision: &'static str,
    feed: Feed,
    entry: Entry,
    output: &'static str,
    classes: &'a [String],
    rows: Vec<Row<'a>>,
}

/// Renders `s` as pretty-printed JSON.
pub fn render(s: &Scored) -> Result<String> {
    let rows = s
        .rows
        .iter()
        .enumerate()
        .map(|(i, r)| Row {
            row: s.first_row + i,
            class: r.class,
            label: s.class_name(r.class),
            truth: s.truth.as_ref().and_then(|t| t.get(i).copied()),
            // Widened to f64, the exact value of each f32 is what serde_json prints.
            scores: r.scores.iter().map(|&x| f64::from(x)).collect(),
            outputs: match &r.outputs {
                LastOutputs::Int8(v) => Outputs::Int8(v.clone()),
                LastOutputs::F32(v) => Outputs::F32(v.iter().map(|&x| f64::from(x)).collect()),
            },
        })
        .collect();
    let doc = Document {
        blob: &s.blob,
        data: &s.data,
        precision: precision_name(s.precision),
        feed: s.feed,
        entry: s.entry,
        output: output_name(s.output),
        classes: &s.class_names,
        rows,
    };
    Ok(serde_json::to_string_pretty(&doc)? + "\n")
}
