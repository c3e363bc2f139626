//! Checking a parsed description and building the [`FloatModel`].

use std::path::Path;

use super::error::PlainImportError as E;
use super::schema::{
    ActivationDoc, BiasObject, InlineOr, LayerDoc, Layout, ModelDoc, NumOrRow, OutputDoc,
    WeightsObject,
};
use crate::dataset::npy_array::read_npy;
use crate::graph::{Activation, DenseLayer, FloatModel, OutputKind};
use crate::scaler_file::check_scaler_width;

/// Builds the model; `.npy` paths are resolved against `base_dir`.
pub(super) fn build_model(doc: ModelDoc, base_dir: &Path) -> Result<FloatModel, E> {
    if doc.input_width == 0 {
        return Err(E::ZeroInputWidth);
    }
    if doc.layers.is_empty() {
        return Err(E::NoLayers);
    }
    let mut layers = Vec::with_capacity(doc.layers.len());
    let mut width = doc.input_width;
    for (k, layer) in doc.layers.into_iter().enumerate() {
        let from = if k == 0 {
            "input_width".to_string()
        } else {
            format!("layers[{}].outputs", k - 1)
        };
        let built = build_layer(k, layer, width, from, base_dir)?;
        width = built.outputs;
        layers.push(built);
    }
    let output = match doc.output {
        OutputDoc::Softmax if width == 1 => return Err(E::SoftmaxSingle),
        OutputDoc::Softmax => OutputKind::Softmax,
        OutputDoc::Sigmoid if width != 1 => return Err(E::SigmoidOutputs(width)),
        OutputDoc::Sigmoid => OutputKind::Sigmoid,
        OutputDoc::None => OutputKind::Logits,
    };
    let scaler = match doc.scaler {
        None => None,
        Some(spec) => {
            let s = spec.into_scaler().map_err(E::Scaler)?;
            check_scaler_width(&s, doc.input_width).map_err(E::Scaler)?;
            Some(s)
        }
    };
    let mut model = FloatModel {
        input_len: doc.input_width,
        scaler,
        layers,
        output,
        labels: Vec::new(),
    };
    if let Some(labels) = doc.labels {
        check_labels(&labels, &model)?;
        model.labels = labels;
    }
    Ok(model)
}

fn check_labels(labels: &[String], model: &FloatModel) -> Result<(), E> {
    let expected = model.classes();
    if labels.len() != expected {
        let note = if model.output == OutputKind::Sigmoid {
            " (a sigmoid model has two: the negative class, then the positive)"
        } else {
            ""
        };
        return Err(E::LabelCount {
            found: labels.len(),
            expected,
            note,
        });
    }
    for (i, l) in labels.iter().enumerate() {
        if l.trim().is_empty() {
            return Err(E::EmptyLabel(i));
        }
        if let Some(first) = labels.iter().take(i).position(|m| m == l) {
            return Err(E::DuplicateLabel {
                label: l.clone(),
                first,
                second: i,
            });
        }
    }
    Ok(())
}

fn build_layer(
    k: usize,
    layer: LayerDoc,
    fed: usize,
    from: String,
    base_dir: &Path,
) -> Result<DenseLayer, E> {
    let (inputs, outputs) = (layer.inputs, layer.outputs);
    if inputs == 0 {
        return Err(E::ZeroSized {
            layer: k,
            field: "inputs",
        });
    }
    if outputs == 0 {
        return Err(E::ZeroSized {
            layer: k,
            field: "outputs",
        });
    }
    if inputs != fed {
        return Err(E::ChainMismatch {
            layer: k,
            inputs,
            expected: fed,
            from,
        });
    }
    let weights = match layer.weights {
        InlineOr::Inline(list) => inline_weights(k, list, None, inputs, outputs)?,
        InlineOr::Object(WeightsObject {
            layout,
            values: Some(list),
            npy: None,
        }) => inline_weights(k, list, Some(layout), inputs, outputs)?,
        InlineOr::Object(WeightsObject {
            layout,
            values: None,
            npy: Some(p),
        }) => {
            let path = base_dir.join(p);
            let (rows, cols) = layout.dims(inputs, outputs);
            let what = match layout {
                Layout::OutIn => "layout out_in ([outputs, inputs])",
                Layout::InOut => "layout in_out ([inputs, outputs])",
            };
            let m = read_floats(k, "weights", &path, &[rows, cols], what)?;
            to_out_in(&m, layout, inputs, outputs)
        }
        InlineOr::Object(_) => return Err(E::WeightSource { layer: k }),
    };
    let weights = finite_weights(k, weights, inputs)?;
    let bias = match layer.bias {
        InlineOr::Inline(v) => {
            if v.len() != outputs {
                return Err(E::BiasLength {
                    layer: k,
                    found: v.len(),
                    expected: outputs,
                });
            }
            v
        }
        InlineOr::Object(BiasObject { npy }) => read_floats(
            k,
            "bias",
            &base_dir.join(npy),
            &[outputs],
            "a bias of one value per output",
        )?,
    };
    let bias = bias
        .into_iter()
        .enumerate()
        .map(|(o, v)| finite(v).ok_or_else(|| not_finite(k, "bias", format!("output {o}"), v)))
        .collect::<Result<Vec<f32>, E>>()?;
    let activation = match layer.activation {
        ActivationDoc::Relu => Activation::Relu,
        ActivationDoc::Linear => Activation::Linear,
    };
    Ok(DenseLayer {
        inputs,
        outputs,
        weights,
        bias,
        activation,
    })
}

fn finite(v: f64) -> Option<f32> {
    let f = v as f32;
    f.is_finite().then_some(f)
}

fn not_finite(layer: usize, field: &'static str, position: String, value: f64) -> E {
    E::NotFinite {
        layer,
        field,
        position,
        value,
    }
}

fn finite_weights(k: usize, w: Vec<f64>, inputs: usize) -> Result<Vec<f32>, E> {
    w.into_iter()
        .enumerate()
        .map(|(j, v)| {
            finite(v).ok_or_else(|| {
                not_finite(
                    k,
                    "weights",
                    format!("output {}, input {}", j / inputs, j % inputs),
                    v,
                )
            })
        })
        .collect()
}

/// Reorders a row-major matrix in `layout` into `[outputs][inputs]`.
fn to_out_in(m: &[f64], layout: Layout, inputs: usize, outputs: usize) -> Vec<f64> {
    match layout {
        Layout::OutIn => m.to_vec(),
        Layout::InOut => (0..outputs)
            .flat_map(|o| (0..inputs).map(move |i| (o, i)))
            .map(|(o, i)| m.get(i * outputs + o).copied().unwrap_or(f64::NAN))
            .collect(),
    }
}

/// Inline weights: a flat list (which needs a layout) or a list of rows (layout `out_in` unless
/// given). Returns `[outputs][inputs]` row-major.
fn inline_weights(
    k: usize,
    list: Vec<NumOrRow>,
    layout: Option<Layout>,
    inputs: usize,
    outputs: usize,
) -> Result<Vec<f64>, E> {
    if matches!(list.first(), Some(NumOrRow::Row(_))) {
        return nested_weights(k, list, layout.unwrap_or(Layout::OutIn), inputs, outputs);
    }
    let flat: Vec<f64> = list
        .into_iter()
        .map(|item| match item {
            NumOrRow::Num(v) => Ok(v),
            NumOrRow::Row(_) => Err(E::MixedMatrix { layer: k }),
        })
        .collect::<Result<_, _>>()?;
    if Some(flat.len()) != inputs.checked_mul(outputs) {
        return Err(E::WeightCount {
            layer: k,
            found: flat.len(),
            inputs,
            outputs,
        });
    }
    let Some(lay) = layout else {
        return Err(E::FlatNeedsLayout { layer: k });
    };
    Ok(to_out_in(&flat, lay, inputs, outputs))
}

/// A list of rows in `lay`; returns `[outputs][inputs]` row-major.
fn nested_weights(
    k: usize,
    list: Vec<NumOrRow>,
    lay: Layout,
    inputs: usize,
    outputs: usize,
) -> Result<Vec<f64>, E> {
    let (rows, cols) = lay.dims(inputs, outputs);
    let (rows_name, cols_name) = match lay {
        Layout::OutIn => ("outputs", "inputs"),
        Layout::InOut => ("inputs", "outputs"),
    };
    if list.len() != rows {
        return Err(E::RowCount {
            layer: k,
            found: list.len(),
            expected: rows,
            layout: lay.name(),
            rows_name,
            cols_name,
        });
    }
    // Grown as rows arrive: `cols` comes from the document and may be absurd.
    let mut flat = Vec::new();
    for (r, item) in list.into_iter().enumerate() {
        match item {
            NumOrRow::Row(row) if row.len() == cols => flat.extend(row),
            NumOrRow::Row(row) => {
                return Err(E::RowLength {
                    layer: k,
                    row: r,
                    found: row.len(),
                    expected: cols,
                    layout: lay.name(),
                })
            }
            NumOrRow::Num(_) => return Err(E::MixedMatrix { layer: k }),
        }
    }
    Ok(to_out_in(&flat, lay, inputs, outputs))
}

/// Reads a float32/float64 `.npy` array of exactly `shape`, values in C order.
fn read_floats(
    k: usize,
    field: &'static str,
    path: &Path,
    shape: &[usize],
    what: &str,
) -> Result<Vec<f64>, E> {
    let arr = read_npy(path).map_err(|source| E::Npy {
        layer: k,
        field,
        path: path.to_path_buf(),
        source,
    })?;
    if arr.shape != shape {
        return Err(E::NpyShape {
            layer: k,
            field,
            path: path.to_path_buf(),
            found: arr.shape,
            expected: shape.to_vec(),
            what: what.to_string(),
        });
    }
    arr.values.floats().ok_or_else(|| E::NpyDtype {
        layer: k,
        field,
        path: path.to_path_buf(),
        dtype: arr.dtype,
    })
}
