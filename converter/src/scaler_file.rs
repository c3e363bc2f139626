//! A separately saved input scaler: a small JSON file for a model file that carries none.
//!
//! The same JSON object is accepted as the `"scaler"` of a plain model description
//! (`docs/plain-model-format.md`). It has exactly one of these forms:
//!
//! | form | fields | affine map `(x - offset) * scale` |
//! | --- | --- | --- |
//! | standardise | `"mean": [..], "std": [..]` | offset = mean, scale = 1 / std |
//! | min-max | `"min": [..], "max": [..]`, optional `"range": [lo, hi]` (default `[0, 1]`) | scale = (hi - lo) / (max - min), offset = min - lo / scale |
//! | divide | `"divide_by": d` (d > 0) | offset = 0, scale = 1 / d |
//! | factor | `"factor": f`, optional `"offset": o` (default 0); each a number or a per-feature list | offset = o, scale = f |
//!
//! In the factor form the offset is subtracted *before* multiplying: `{"factor": 0.5, "offset": 2}`
//! maps 4 to 1.
//!
//! Dumping a fitted scikit-learn scaler takes two lines of Python:
//!
//! ```python
//! import json
//! # StandardScaler
//! json.dump({"mean": scaler.mean_.tolist(), "std": scaler.scale_.tolist()}, open("scaler.json", "w"))
//! # MinMaxScaler
//! json.dump({"min": scaler.data_min_.tolist(), "max": scaler.data_max_.tolist(),
//!            "range": list(scaler.feature_range)}, open("scaler.json", "w"))
//! ```
//!
//! Pixel data scaled by hand, `x / 255.0`, is `{"divide_by": 255}`.
//!
//! Rejected: a zero or negative std, max equal to or below min, a range whose low end is not below
//! its high end, a zero or negative divisor, a zero factor, values that are not finite in f32,
//! lists of different lengths, empty lists, unknown fields and mixed forms.

use std::path::{Path, PathBuf};

use serde::Deserialize;

use crate::graph::{FloatModel, Scaler, ScalerKind};

/// Why a scaler file could not be loaded or attached.
#[derive(Debug, thiserror::Error)]
pub enum ScalerFileError {
    /// The file could not be read.
    #[error("{}: cannot read the file", path.display())]
    Io {
        /// The file.
        path: PathBuf,
        /// What the system said.
        #[source]
        source: std::io::Error,
    },
    /// An error inside a named file.
    #[error("{}", path.display())]
    InFile {
        /// The file.
        path: PathBuf,
        /// What is wrong in it.
        #[source]
        source: Box<ScalerFileError>,
    },
    /// The text is not valid JSON.
    #[error("not valid JSON")]
    Syntax(#[source] serde_json::Error),
    /// The text does not fit the scaler fields.
    #[error("at `{location}`")]
    Json {
        /// Where in the document (`.` for the top level).
        location: String,
        /// What the JSON reader said, with line and column.
        #[source]
        source: serde_json::Error,
    },
    /// None of the known forms.
    #[error(
        "no scaler fields: expected \"mean\" and \"std\", \"min\" and \"max\" (and optional \"range\"), \"divide_by\", or \"factor\" (and optional \"offset\")"
    )]
    NoForm,
    /// Fields of more than one form.
    #[error("fields of different scaler forms mixed: {0}; give exactly one form")]
    MixedForms(String),
    /// A field its form requires is missing.
    #[error("\"{present}\" needs \"{missing}\" as well")]
    Missing {
        /// The field that is there.
        present: &'static str,
        /// The field that is not.
        missing: &'static str,
    },
    /// A per-feature list is empty.
    #[error("\"{0}\" is an empty list")]
    EmptyList(&'static str),
    /// Two per-feature lists differ in length.
    #[error("\"{a}\" has {a_len} values but \"{b}\" has {b_len}")]
    LengthMismatch {
        /// First field.
        a: &'static str,
        /// Its length.
        a_len: usize,
        /// Second field.
        b: &'static str,
        /// Its length.
        b_len: usize,
    },
    /// A standard deviation of zero.
    #[error(
        "feature {feature} (0-based) has std 0: a constant feature cannot be standardised; drop it or set its std to 1"
    )]
    ZeroStd {
        /// 0-based feature index.
        feature: usize,
    },
    /// A negative standard deviation.
    #[error("feature {feature} (0-based) has std {}: a standard deviation must be positive", crate::echo::number(*value))]
    NegativeStd {
        /// 0-based feature index.
        feature: usize,
        /// The value.
        value: f64,
    },
    /// max equal to min.
    #[error(
        "feature {feature} (0-based) has min = max = {}: a constant feature cannot be min-max scaled; drop it or set max to min + 1 (as scikit-learn does)",
        crate::echo::number(*value)
    )]
    EqualMinMax {
        /// 0-based feature index.
        feature: usize,
        /// The common value.
        value: f64,
    },
    /// max below min.
    #[error("feature {feature} (0-based) has max {} below min {}", crate::echo::number(*max), crate::echo::number(*min))]
    MaxBelowMin {
        /// 0-based feature index.
        feature: usize,
        /// min.
        min: f64,
        /// max.
        max: f64,
    },
    /// A bad target range.
    #[error("\"range\" must be two numbers [low, high] with low < high, found {0}")]
    BadRange(String),
    /// A zero, negative or non-finite divisor.
    #[error("divisor {} must be a positive finite number", crate::echo::number(*.0))]
    BadDivisor(f64),
    /// A factor of zero.
    #[error("\"factor\" is 0{}: every input would become the same value", feature.map(|f| format!(" for feature {f} (0-based)")).unwrap_or_default())]
    ZeroFactor {
        /// The feature, for a per-feature list.
        feature: Option<usize>,
    },
    /// A value (or the scale derived from it) is not a finite f32.
    #[error("{what} for feature {feature} (0-based) is {}, which is not a finite f32", crate::echo::number(*value))]
    NotFinite {
        /// The field or derived quantity.
        what: &'static str,
        /// 0-based feature index (0 for a single value).
        feature: usize,
        /// The value in f64.
        value: f64,
    },
    /// The model already carries a scaler.
    #[error("the model already has an input scaler; a second one would be applied twice")]
    AlreadyHasScaler,
    /// The scaler's width fits neither 1 nor the model.
    #[error("the scaler has {width} values per list, but the model takes {input_len} inputs (a scaler has 1 value or one per input)")]
    WidthMismatch {
        /// The scaler's list length.
        width: usize,
        /// The model's input width.
        input_len: usize,
    },
}

/// A number or a per-feature list of numbers.
#[derive(Debug, Clone, Deserialize)]
#[serde(untagged)]
pub(crate) enum Numbers {
    /// One value for every feature.
    One(f64),
    /// One value per feature.
    Many(Vec<f64>),
}

impl Numbers {
    fn as_slice(&self) -> &[f64] {
        match self {
            Numbers::One(v) => std::slice::from_ref(v),
            Numbers::Many(v) => v,
        }
    }
}

/// The scaler JSON object, as written (see the module docs for the forms).
#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct ScalerSpec {
    mean: Option<Vec<f64>>,
    std: Option<Vec<f64>>,
    min: Option<Vec<f64>>,
    max: Option<Vec<f64>>,
    range: Option<Vec<f64>>,
    divide_by: Option<f64>,
    factor: Option<Numbers>,
    offset: Option<Numbers>,
}

/// Casts to f32, rejecting what is not finite there.
fn finite_f32(what: &'static str, feature: usize, value: f64) -> Result<f32, ScalerFileError> {
    let v = value as f32;
    if v.is_finite() {
        Ok(v)
    } else {
        Err(ScalerFileError::NotFinite {
            what,
            feature,
            value,
        })
    }
}

fn non_empty(name: &'static str, v: &[f64]) -> Result<(), ScalerFileError> {
    if v.is_empty() {
        Err(ScalerFileError::EmptyList(name))
    } else {
        Ok(())
    }
}

fn same_len(
    a: &'static str,
    av: &[f64],
    b: &'static str,
    bv: &[f64],
) -> Result<(), ScalerFileError> {
    if av.len() == bv.len() {
        Ok(())
    } else {
        Err(ScalerFileError::LengthMismatch {
            a,
            a_len: av.len(),
            b,
            b_len: bv.len(),
        })
    }
}

impl ScalerSpec {
    /// Checks the fields and builds the affine scaler.
    pub(crate) fn into_scaler(self) -> Result<Scaler, ScalerFileError> {
        let mut forms: Vec<&str> = Vec::new();
        let standard = self.mean.is_some() || self.std.is_some();
        let minmax = self.min.is_some() || self.max.is_some() || self.range.is_some();
        let divide = self.divide_by.is_some();
        let factor = self.factor.is_some() || self.offset.is_some();
        for (on, name) in [
            (standard, "mean/std"),
            (minmax, "min/max/range"),
            (divide, "divide_by"),
            (factor, "factor/offset"),
        ] {
            if on {
                forms.push(name);
            }
        }
        if forms.len() > 1 {
            return Err(ScalerFileError::MixedForms(forms.join(", ")));
        }
        if standard {
            let (mean, std) = match (self.mean, self.std) {
                (Some(m), Some(s)) => (m, s),
                (Some(_), None) => {
                    return Err(ScalerFileError::Missing {
                        present: "mean",
                        missing: "std",
                    })
                }
                _ => {
                    return Err(ScalerFileError::Missing {
                        present: "std",
                        missing: "mean",
                    })
                }
            };
            standardise(&mean, &std)
        } else if minmax {
            let (min, max) = match (self.min, self.max) {
                (Some(a), Some(b)) => (a, b),
                (None, max) => {
                    let present = if max.is_some() { "max" } else { "range" };
                    return Err(ScalerFileError::Missing {
                        present,
                        missing: "min",
                    });
                }
                (Some(_), None) => {
                    return Err(ScalerFileError::Missing {
                        present: "min",
                        missing: "max",
                    })
                }
            };
            min_max(&min, &max, self.range.as_deref().unwrap_or(&[0.0, 1.0]))
        } else if let Some(d) = self.divide_by {
            uniform_divisor_f64(d)
        } else if factor {
            let f = self.factor.unwrap_or(Numbers::One(1.0));
            let o = self.offset.unwrap_or(Numbers::One(0.0));
            factor_offset(&f, &o)
        } else {
            Err(ScalerFileError::NoForm)
        }
    }
}

fn standardise(mean: &[f64], std: &[f64]) -> Result<Scaler, ScalerFileError> {
    non_empty("mean", mean)?;
    non_empty("std", std)?;
    same_len("mean", mean, "std", std)?;
    let mut offset = Vec::with_capacity(mean.len());
    let mut scale = Vec::with_capacity(std.len());
    for (i, (&m, &s)) in mean.iter().zip(std).enumerate() {
        offset.push(finite_f32("mean", i, m)?);
        finite_f32("std", i, s)?;
        if s == 0.0 {
            return Err(ScalerFileError::ZeroStd { feature: i });
        }
        if s < 0.0 {
            return Err(ScalerFileError::NegativeStd {
                feature: i,
                value: s,
            });
        }
        scale.push(finite_f32("1 / std", i, 1.0 / s)?);
    }
    Ok(Scaler {
        kind: ScalerKind::Standardise,
        offset,
        scale,
    })
}

fn min_max(min: &[f64], max: &[f64], range: &[f64]) -> Result<Scaler, ScalerFileError> {
    non_empty("min", min)?;
    non_empty("max", max)?;
    same_len("min", min, "max", max)?;
    let (lo, hi) = match range {
        [lo, hi] if lo.is_finite() && hi.is_finite() && lo < hi => (*lo, *hi),
        other => return Err(ScalerFileError::BadRange(format!("{other:?}"))),
    };
    let mut offset = Vec::with_capacity(min.len());
    let mut scale = Vec::with_capacity(min.len());
    for (i, (&a, &b)) in min.iter().zip(max).enumerate() {
        finite_f32("min", i, a)?;
        finite_f32("max", i, b)?;
        if a == b {
            return Err(ScalerFileError::EqualMinMax {
                feature: i,
                value: a,
            });
        }
        if b < a {
            return Err(ScalerFileError::MaxBelowMin {
                feature: i,
                min: a,
                max: b,
            });
        }
        // y = (x - min) / (max - min) * (hi - lo) + lo  =  (x - (min - lo / s)) * s
        let s = (hi - lo) / (b - a);
        scale.push(finite_f32("the min-max scale", i, s)?);
        offset.push(finite_f32("the min-max offset", i, a - lo / s)?);
    }
    Ok(Scaler {
        kind: ScalerKind::MinMax,
        offset,
        scale,
    })
}

fn uniform_divisor_f64(d: f64) -> Result<Scaler, ScalerFileError> {
    if !(d.is_finite() && d > 0.0) {
        return Err(ScalerFileError::BadDivisor(d));
    }
    let scale = (1.0 / d) as f32;
    if !(scale.is_finite() && scale > 0.0) {
        return Err(ScalerFileError::BadDivisor(d));
    }
    Ok(Scaler {
        kind: ScalerKind::Uniform,
        offset: vec![0.0],
        scale: vec![scale],
    })
}

fn factor_offset(factor: &Numbers, offset: &Numbers) -> Result<Scaler, ScalerFileError> {
    let (f, o) = (factor.as_slice(), offset.as_slice());
    non_empty("factor", f)?;
    non_empty("offset", o)?;
    if f.len() > 1 && o.len() > 1 {
        same_len("factor", f, "offset", o)?;
    }
    let per_feature = matches!(factor, Numbers::Many(_)) || matches!(offset, Numbers::Many(_));
    let mut scale = Vec::with_capacity(f.len());
    for (i, &v) in f.iter().enumerate() {
        if v == 0.0 {
            return Err(ScalerFileError::ZeroFactor {
                feature: per_feature.then_some(i),
            });
        }
        scale.push(finite_f32("factor", i, v)?);
    }
    let offset = o
        .iter()
        .enumerate()
        .map(|(i, &v)| finite_f32("offset", i, v))
        .collect::<Result<Vec<_>, _>>()?;
    let kind = if per_feature {
        ScalerKind::Affine
    } else {
        ScalerKind::Uniform
    };
    Ok(Scaler {
        kind,
        offset,
        scale,
    })
}

/// Builds a uniform scaler `x / d` from a command-line divisor (such as 255 for 8-bit pixels).
pub fn uniform_divisor(d: f32) -> Result<Scaler, ScalerFileError> {
    uniform_divisor_f64(f64::from(d))
}

/// Turns a JSON deserialisation error into one that says where in the document it is.
pub(crate) fn json_error(e: serde_path_to_error::Error<serde_json::Error>) -> ScalerFileError {
    let location = e.path().to_string();
    let source = e.into_inner();
    if source.is_syntax() || source.is_eof() {
        ScalerFileError::Syntax(source)
    } else {
        ScalerFileError::Json { location, source }
    }
}

/// Parses scaler JSON text (see the module docs for the forms).
pub fn parse_scaler_json(s: &str) -> Result<Scaler, ScalerFileError> {
    let de = &mut serde_json::Deserializer::from_str(s);
    let spec: ScalerSpec = serde_path_to_error::deserialize(de).map_err(json_error)?;
    spec.into_scaler()
}

/// Loads a scaler JSON file; errors name the file.
pub fn load_scaler_file(path: &Path) -> Result<Scaler, ScalerFileError> {
    let text = std::fs::read_to_string(path).map_err(|source| ScalerFileError::Io {
        path: path.to_path_buf(),
        source,
    })?;
    parse_scaler_json(&text).map_err(|e| ScalerFileError::InFile {
        path: path.to_path_buf(),
        source: Box::new(e),
    })
}

/// Checks that `scaler`'s lists have length 1 or `input_len`.
pub(crate) fn check_scaler_width(scaler: &Scaler, input_len: usize) -> Result<(), ScalerFileError> {
    for width in [scaler.offset.len(), scaler.scale.len()] {
        if width != 1 && width != input_len {
            return Err(ScalerFileError::WidthMismatch { width, input_len });
        }
    }
    Ok(())
}

/// Gives `model` the separately saved `scaler`. Rejected when the model already has a scaler, or
/// when the scaler's width is neither 1 nor the model's input width.
pub fn attach_scaler(model: &mut FloatModel, scaler: Scaler) -> Result<(), ScalerFileError> {
    if model.scaler.is_some() {
        return Err(ScalerFileError::AlreadyHasScaler);
    }
    check_scaler_width(&scaler, model.input_len)?;
    model.scaler = Some(scaler);
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::error_line::ErrorLine;
    use crate::graph::{Activation, DenseLayer, OutputKind};

    fn parse(s: &str) -> Result<Scaler, ScalerFileError> {
        parse_scaler_json(s)
    }

    #[test]
    fn standardise_maps_mean_to_zero_and_one_std_to_one() {
        let s = parse(r#"{"mean": [1.0, -2.0], "std": [2.0, 0.5]}"#).unwrap();
        assert_eq!(s.kind, ScalerKind::Standardise);
        assert_eq!(s.apply(&[1.0, -2.0]), vec![0.0, 0.0]);
        assert_eq!(s.apply(&[3.0, -1.5]), vec![1.0, 1.0]);
    }

    #[test]
    fn zero_std_message() {
        let e = parse(r#"{"mean": [0, 0, 0, 0], "std": [1, 1, 1, 0]}"#)
            .unwrap_err()
            .line();
        assert_eq!(
            e,
            "feature 3 (0-based) has std 0: a constant feature cannot be standardised; drop it or set its std to 1"
        );
    }

    #[test]
    fn negative_std_rejected() {
        let e = parse(r#"{"mean": [0], "std": [-1]}"#).unwrap_err();
        assert!(
            matches!(e, ScalerFileError::NegativeStd { feature: 0, .. }),
            "{e}"
        );
    }

    #[test]
    fn min_max_default_range_maps_min_to_0_and_max_to_1() {
        let s = parse(r#"{"min": [2, -1], "max": [6, 1]}"#).unwrap();
        assert_eq!(s.kind, ScalerKind::MinMax);
        assert_eq!(s.apply(&[2.0, -1.0]), vec![0.0, 0.0]);
        assert_eq!(s.apply(&[6.0, 1.0]), vec![1.0, 1.0]);
        assert_eq!(s.apply(&[4.0, 0.0]), vec![0.5, 0.5]);
    }

    #[test]
    fn min_max_with_target_range() {
        let s = parse(r#"{"min": [0], "max": [10], "range": [-1, 1]}"#).unwrap();
        assert_eq!(s.apply(&[0.0, 10.0, 5.0]), vec![-1.0, 1.0, 0.0]);
    }

    #[test]
    fn min_max_errors() {
        let e = parse(r#"{"min": [1, 3.5], "max": [2, 3.5]}"#).unwrap_err();
        assert!(
            matches!(e, ScalerFileError::EqualMinMax { feature: 1, .. }),
            "{e}"
        );
        assert!(e.to_string().contains("min = max = 3.5"), "{e}");
        let e = parse(r#"{"min": [2], "max": [1]}"#).unwrap_err();
        assert!(
            matches!(e, ScalerFileError::MaxBelowMin { feature: 0, .. }),
            "{e}"
        );
        for r in ["[1, 0]", "[0, 0]", "[0]", "[0, 1, 2]"] {
            let e = parse(&format!(r#"{{"min": [0], "max": [1], "range": {r}}}"#)).unwrap_err();
            assert!(matches!(e, ScalerFileError::BadRange(_)), "{r}: {e}");
        }
        let e = parse(r#"{"min": [0, 1], "max": [1]}"#).unwrap_err().line();
        assert_eq!(e, "\"min\" has 2 values but \"max\" has 1");
        let e = parse(r#"{"max": [1]}"#).unwrap_err().line();
        assert_eq!(e, "\"max\" needs \"min\" as well");
        let e = parse(r#"{"range": [0, 1]}"#).unwrap_err().line();
        assert_eq!(e, "\"range\" needs \"min\" as well");
    }

    #[test]
    fn divide_by() {
        let s = parse(r#"{"divide_by": 255}"#).unwrap();
        assert_eq!(s.kind, ScalerKind::Uniform);
        assert_eq!(s.offset, vec![0.0]);
        assert_eq!(s.apply(&[255.0, 0.0]), vec![1.0, 0.0]);
        for d in ["0", "-2"] {
            let e = parse(&format!(r#"{{"divide_by": {d}}}"#)).unwrap_err();
            assert!(matches!(e, ScalerFileError::BadDivisor(_)), "{e}");
        }
    }

    #[test]
    fn uniform_divisor_from_command_line() {
        let s = uniform_divisor(4.0).unwrap();
        assert_eq!(s.apply(&[2.0]), vec![0.5]);
        for d in [0.0, -1.0, f32::NAN, f32::INFINITY] {
            assert!(
                matches!(uniform_divisor(d), Err(ScalerFileError::BadDivisor(_))),
                "{d}"
            );
        }
        // So small that 1/d overflows f32.
        assert!(uniform_divisor(1e-40).is_err());
    }

    #[test]
    fn factor_and_offset() {
        let s = parse(r#"{"factor": 0.5, "offset": 2}"#).unwrap();
        assert_eq!(s.kind, ScalerKind::Uniform);
        assert_eq!(s.apply(&[4.0]), vec![1.0]);
        let s = parse(r#"{"factor": 0.00392, "offset": 0}"#).unwrap();
        assert_eq!(s.scale, vec![0.00392]);
        let s = parse(r#"{"factor": 2}"#).unwrap();
        assert_eq!((s.offset.clone(), s.scale.clone()), (vec![0.0], vec![2.0]));
        let s = parse(r#"{"offset": [1, 2]}"#).unwrap();
        assert_eq!(s.kind, ScalerKind::Affine);
        assert_eq!(s.apply(&[1.0, 3.0]), vec![0.0, 1.0]);
        let s = parse(r#"{"factor": [1, 10], "offset": 1}"#).unwrap();
        assert_eq!(s.apply(&[2.0, 2.0]), vec![1.0, 10.0]);
        let e = parse(r#"{"factor": [1, 2], "offset": [1, 2, 3]}"#).unwrap_err();
        assert!(matches!(e, ScalerFileError::LengthMismatch { .. }), "{e}");
        let e = parse(r#"{"factor": [1, 0]}"#).unwrap_err().line();
        assert_eq!(
            e,
            "\"factor\" is 0 for feature 1 (0-based): every input would become the same value"
        );
    }

    #[test]
    fn values_beyond_f32_are_not_finite() {
        let e = parse(r#"{"mean": [1e39], "std": [1]}"#).unwrap_err();
        assert!(
            matches!(
                e,
                ScalerFileError::NotFinite {
                    what: "mean",
                    feature: 0,
                    ..
                }
            ),
            "{e}"
        );
        let e = parse(r#"{"mean": [0, 0], "std": [1, 1e-46]}"#).unwrap_err();
        assert!(
            matches!(
                e,
                ScalerFileError::NotFinite {
                    what: "1 / std",
                    feature: 1,
                    ..
                }
            ),
            "{e}"
        );
        // JSON itself has no NaN or infinity literal, and serde_json refuses numbers past f64.
        assert!(matches!(
            parse(r#"{"mean": [NaN], "std": [1]}"#),
            Err(ScalerFileError::Syntax(_))
        ));
        assert!(matches!(
            parse(r#"{"mean": [1e400], "std": [1]}"#),
            Err(ScalerFileError::Syntax(_))
        ));
    }

    #[test]
    fn form_errors() {
        assert!(matches!(parse("{}"), Err(ScalerFileError::NoForm)));
        let e = parse(r#"{"mean": [0], "std": [1], "divide_by": 2}"#)
            .unwrap_err()
            .line();
        assert_eq!(
            e,
            "fields of different scaler forms mixed: mean/std, divide_by; give exactly one form"
        );
        let e = parse(r#"{"mean": [0]}"#).unwrap_err().line();
        assert_eq!(e, "\"mean\" needs \"std\" as well");
        let e = parse(r#"{"mean": [], "std": []}"#).unwrap_err().line();
        assert_eq!(e, "\"mean\" is an empty list");
        let e = parse(r#"{"mean": [0, 1], "std": [1]}"#).unwrap_err();
        assert!(
            matches!(
                e,
                ScalerFileError::LengthMismatch {
                    a_len: 2,
                    b_len: 1,
                    ..
                }
            ),
            "{e}"
        );
    }

    #[test]
    fn unknown_field_and_bad_json_say_where() {
        let e = parse(r#"{"mean": [0], "scale": [1]}"#).unwrap_err().line();
        assert!(e.contains("unknown field `scale`"), "{e}");
        assert!(e.contains("line 1"), "{e}");
        let e = parse(r#"{"mean": [0, "x"], "std": [1, 1]}"#)
            .unwrap_err()
            .line();
        assert!(e.starts_with("at `mean[1]`"), "{e}");
        let e = parse("{\"divide_by\": 2,}").unwrap_err().line();
        assert_eq!(e, "not valid JSON: trailing comma at line 1 column 17");
        assert!(matches!(parse("{"), Err(ScalerFileError::Syntax(_))));
        assert!(matches!(parse("[1, 2]"), Err(ScalerFileError::Json { .. })));
    }

    #[test]
    fn load_names_the_file() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("s.json");
        std::fs::write(&p, r#"{"divide_by": 0}"#).unwrap();
        let e = load_scaler_file(&p).unwrap_err().line();
        assert_eq!(
            e,
            format!(
                "{}: divisor 0 must be a positive finite number",
                p.display()
            )
        );
        std::fs::write(&p, r#"{"divide_by": 2}"#).unwrap();
        assert_eq!(load_scaler_file(&p).unwrap().scale, vec![0.5]);
        let e = load_scaler_file(&dir.path().join("none.json")).unwrap_err();
        assert!(matches!(e, ScalerFileError::Io { .. }), "{e}");
    }

    fn model(input_len: usize) -> FloatModel {
        FloatModel {
            input_len,
            scaler: None,
            layers: vec![DenseLayer {
                inputs: input_len,
                outputs: 1,
                weights: vec![1.0; input_len],
                bias: vec![0.0],
                activation: Activation::Linear,
            }],
            output: OutputKind::Sigmoid,
            labels: vec![],
        }
    }

    #[test]
    fn attach_checks_width_and_existing_scaler() {
        let mut m = model(3);
        let per_feature = parse(r#"{"mean": [0, 0, 0], "std": [1, 2, 4]}"#).unwrap();
        attach_scaler(&mut m, per_feature.clone()).unwrap();
        assert_eq!(m.scaler.as_ref(), Some(&per_feature));
        let e = attach_scaler(&mut m, uniform_divisor(2.0).unwrap()).unwrap_err();
        assert!(matches!(e, ScalerFileError::AlreadyHasScaler), "{e}");

        let mut m = model(3);
        attach_scaler(&mut m, uniform_divisor(2.0).unwrap()).unwrap();

        let mut m = model(4);
        let e = attach_scaler(&mut m, per_feature).unwrap_err().line();
        assert_eq!(
            e,
            "the scaler has 3 values per list, but the model takes 4 inputs (a scaler has 1 value or one per input)"
        );
        assert!(m.scaler.is_none());
    }
}
