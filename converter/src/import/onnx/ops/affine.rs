//! Composition of the input scaler: the `ai.onnx.ml` `Scaler` op and constant `Sub`/`Add`/
//! `Mul`/`Div` nodes before the first dense layer fold into one per-feature affine map, kept
//! directly in the form the runtime applies, `y = (x - offset) * scale`, computed in f64.
//!
//! Each step updates `(offset, scale)` exactly as the algebra says, so that the common patterns
//! come out without round-off: `Sub m` then `Div s` gives `offset = m`, `scale = 1/s`; `Mul s`
//! then `Add b` (min-max scaling) gives `scale = s`, `offset = -b/s`.
//!
//! - `Sub c`: `(x-o)s - c = (x - (o + c/s)) s`
//! - `Add c`: `(x-o)s + c = (x - (o - c/s)) s`
//! - `Mul c`: `(x-o)(s c)`;  `Div c`: `(x-o)(s/c)`, `c != 0`
//! - `c - y` (constant minus data): `c - (x-o)s = (x - (o + c/s)) (-s)`
//!
//! When `s = 0` an added constant `c != 0` cannot be written as `(x - offset) * scale`; that
//! is an error.

use super::super::attr;
use super::super::error::OnnxImportError;
use super::super::node::Node;
use super::super::normalise::{Stage, Walk};
use super::{constant_input, dense, finite, shape};
use crate::graph::{Scaler, ScalerKind};

/// One step of the scaler, for deciding the [`ScalerKind`].
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Step {
    /// The `ai.onnx.ml` `Scaler` op.
    ScalerOp,
    /// `y - c`.
    Sub,
    /// `c - y`.
    SubFrom,
    /// `y + c`.
    Add,
    /// `y * c`.
    Mul,
    /// `y / c`.
    Div,
}

/// The affine map composed so far. Vectors have length 1 (every feature alike) or `n`.
#[derive(Debug, Clone, PartialEq)]
pub struct Affine {
    offset: Vec<f64>,
    scale: Vec<f64>,
    steps: Vec<Step>,
}

impl Default for Affine {
    fn default() -> Self {
        Affine {
            offset: vec![0.0],
            scale: vec![1.0],
            steps: Vec::new(),
        }
    }
}

impl Affine {
    /// Widens the vectors to `n` features (from 1), or checks they already have `n`.
    fn widen(&mut self, n: usize) -> Result<(), String> {
        let have = self.offset.len();
        if n == 1 || n == have {
            return Ok(());
        }
        if have != 1 {
            return Err(format!(
                "constant has {n} values but the scaler so far has {have} features"
            ));
        }
        let (o, s) = (
            self.offset.first().copied().unwrap_or(0.0),
            self.scale.first().copied().unwrap_or(1.0),
        );
        self.offset = vec![o; n];
        self.scale = vec![s; n];
        Ok(())
    }

    /// Applies one step with a constant of length 1 or `n` (the feature count).
    pub fn apply(&mut self, step: Step, c: &[f32]) -> Result<(), String> {
        if c.is_empty() {
            return Err("the constant is empty".into());
        }
        self.widen(c.len())?;
        let n = self.offset.len();
        let cval = |i: usize| {
            f64::from(
                if c.len() == 1 { c.first() } else { c.get(i) }
                    .copied()
                    .unwrap_or(0.0),
            )
        };
        for i in 0..n {
            let k = cval(i);
            let (Some(o), Some(s)) = (self.offset.get_mut(i), self.scale.get_mut(i)) else {
                continue;
            };
            match step {
                Step::Mul => *s *= k,
                Step::Div => {
                    if k == 0.0 {
                        return Err(format!("division by zero for feature {i}"));
                    }
                    *s /= k;
                }
                Step::Sub | Step::Add | Step::SubFrom | Step::ScalerOp => {
                    let shift = if step == Step::Add { -k } else { k };
                    if *s == 0.0 {
                        if shift != 0.0 {
                            return Err(format!(
                                "for feature {i} the scale is 0 and a constant is added, so the map cannot be written as (x - offset) * scale"
                            ));
                        }
                    } else {
                        *o += shift / *s;
                    }
                    if step == Step::SubFrom {
                        *s = -*s;
                    }
                }
            }
        }
        self.steps.push(step);
        Ok(())
    }

    /// Applies the `ai.onnx.ml` `Scaler`: `y' = (y - offset) * scale`.
    pub fn apply_scaler_op(&mut self, offset: &[f32], scale: &[f32]) -> Result<(), String> {
        // Validate the lengths against each other before changing anything.
        if offset.len() != scale.len() && offset.len() != 1 && scale.len() != 1 {
            return Err(format!(
                "offset has {} values and scale has {}",
                offset.len(),
                scale.len()
            ));
        }
        self.apply(Step::ScalerOp, offset)?;
        self.steps.pop();
        self.apply(Step::Mul, scale)?;
        self.steps.pop();
        self.steps.push(Step::ScalerOp);
        Ok(())
    }

    /// The finished scaler for a model of `width` inputs, or `None` when no step was applied.
    pub fn finish(self, width: usize) -> Result<Option<Scaler>, String> {
        if self.steps.is_empty() {
            return Ok(None);
        }
        let n = self.offset.len();
        if n != 1 && n != width {
            return Err(format!(
                "the scaler has {n} features but the first dense layer takes {width} inputs"
            ));
        }
        let to_f32 = |v: &[f64], what: &str| -> Result<Vec<f32>, String> {
            v.iter()
                .enumerate()
                .map(|(i, &x)| {
                    let y = x as f32;
                    if y.is_finite() {
                        Ok(y)
                    } else {
                        Err(format!(
                            "the scaler's {what} for feature {i} is not a finite f32 ({x})"
                        ))
                    }
                })
                .collect()
        };
        let mut offset = to_f32(&self.offset, "offset")?;
        let mut scale = to_f32(&self.scale, "scale")?;
        let all_same = |v: &[f32]| {
            v.windows(2)
                .all(|w| matches!(w, [a, b] if a.to_bits() == b.to_bits()))
        };
        let kind = if all_same(&offset) && all_same(&scale) {
            offset.truncate(1);
            scale.truncate(1);
            ScalerKind::Uniform
        } else {
            match self.steps.as_slice() {
                // `Sub` then `Mul`: TensorFlow writes a division by a constant as a product with
                // its reciprocal.
                [Step::ScalerOp] | [Step::Sub, Step::Div] | [Step::Sub, Step::Mul] => {
                    ScalerKind::Standardise
                }
                [Step::Mul, Step::Add] => ScalerKind::MinMax,
                _ => ScalerKind::Affine,
            }
        };
        Ok(Some(Scaler {
            kind,
            offset,
            scale,
        }))
    }
}

/// The graph walk's handlers of these ops.
impl<'g> Walk<'g, '_> {
    pub(in super::super) fn scaler_op(&mut self, n: Node<'g>) -> Result<(), OnnxImportError> {
        if self.stage != Stage::Prefix {
            return Err(n.err(format!(
                "Scaler {}; supported: Scaler before the first dense layer",
                self.stage_text()
            )));
        }
        if self.shape.len() != 2 {
            return Err(n.err(format!(
                "Scaler on data of shape {}; supported: [N, features]",
                shape::text(&self.shape)
            )));
        }
        let offset = attr::floats(n.proto, "offset")
            .map_err(|e| n.err(e))?
            .unwrap_or_else(|| vec![0.0]);
        let scale = attr::floats(n.proto, "scale")
            .map_err(|e| n.err(e))?
            .unwrap_or_else(|| vec![1.0]);
        let width = self.shape.get(1).copied().flatten();
        for (what, v) in [("offset", &offset), ("scale", &scale)] {
            if let Some((i, x)) = v.iter().enumerate().find(|(_, x)| !x.is_finite()) {
                return Err(n.err(format!(
                    "attribute {what} has a non-finite value ({x}) at index {i}"
                )));
            }
            let len_ok = v.len() == 1 || width.is_none_or(|w| w == v.len());
            if v.is_empty() || !len_ok {
                return Err(n.err(format!(
                    "attribute {what} has {} values for data of shape {}; supported: 1 value or one per feature",
                    v.len(),
                    shape::text(&self.shape)
                )));
            }
        }
        self.affine
            .apply_scaler_op(&offset, &scale)
            .map_err(|e| n.err(e))?;
        self.first_scaler_node.get_or_insert(n);
        Ok(())
    }

    pub(in super::super) fn arith(
        &mut self,
        n: Node<'g>,
        pos: usize,
    ) -> Result<(), OnnxImportError> {
        if n.inputs().len() != 2 {
            return Err(n.err("expected two inputs"));
        }
        let other = 1 - pos.min(1);
        let c = constant_input(self.g, &n, other, "operand")?;
        let values = finite(&n, &c, "operand")?;
        match self.stage {
            Stage::Prefix => {
                let step = match (n.op(), pos) {
                    ("Sub", 0) => Step::Sub,
                    ("Sub", _) => Step::SubFrom,
                    ("Add", _) => Step::Add,
                    ("Mul", _) => Step::Mul,
                    ("Div", 0) => Step::Div,
                    _ => {
                        return Err(n.err(
                            "a constant divided by the data is not an affine map; supported: data / constant",
                        ))
                    }
                };
                let per = shape::per_feature(&self.shape, &c.dims, values).map_err(|e| n.err(e))?;
                self.affine.apply(step, per).map_err(|e| n.err(e))?;
                self.first_scaler_node.get_or_insert(n);
                Ok(())
            }
            Stage::Open if n.op() == "Add" => {
                let layer = self.layers.last_mut().ok_or_else(|| n.err("internal: no open layer"))?;
                dense::add_bias(layer, &c).map_err(|e| n.err(e))
            }
            _ => Err(n.err(format!(
                "{} with a constant {}; supported: constant Sub/Add/Mul/Div before the first dense layer (the input scaler) and Add right after MatMul/Gemm (the bias)",
                n.op(),
                self.stage_text()
            ))),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Applies the finished scaler in f64 to compare against the step-by-step arithmetic.
    fn run(s: &Scaler, x: &[f32]) -> Vec<f32> {
        s.apply(x)
    }

    #[test]
    fn sub_then_div_keeps_the_mean_exactly() {
        let mut a = Affine::default();
        a.apply(Step::Sub, &[2.0, -1.5]).unwrap();
        a.apply(Step::Div, &[4.0, 0.5]).unwrap();
        let s = a.finish(2).unwrap().unwrap();
        assert_eq!(s.kind, ScalerKind::Standardise);
        assert_eq!(s.offset, vec![2.0, -1.5]);
        assert_eq!(s.scale, vec![0.25, 2.0]);
    }

    #[test]
    fn mul_then_add_is_min_max_with_offset_minus_b_over_s() {
        // Min-max scaling of a feature with min 2 and max 6 onto [0, 1]: x*0.25 - 0.5.
        // offset = -(-0.5)/0.25 = 2 (the min), scale = 0.25.
        let mut a = Affine::default();
        a.apply(Step::Mul, &[0.25, 1.0]).unwrap();
        a.apply(Step::Add, &[-0.5, 3.0]).unwrap();
        let s = a.finish(2).unwrap().unwrap();
        assert_eq!(s.kind, ScalerKind::MinMax);
        assert_eq!(s.offset, vec![2.0, -3.0]);
        assert_eq!(s.scale, vec![0.25, 1.0]);
        let y = run(&s, &[6.0, 1.0]);
        assert_eq!(y, vec![1.0, 4.0]);
    }

    #[test]
    fn uniform_when_all_features_alike() {
        let mut a = Affine::default();
        a.apply(Step::Div, &[255.0]).unwrap();
        let s = a.finish(784).unwrap().unwrap();
        assert_eq!(s.kind, ScalerKind::Uniform);
        assert_eq!(s.offset, vec![0.0]);
        assert_eq!(s.scale, vec![(1.0f64 / 255.0) as f32]);
        let mut b = Affine::default();
        b.apply_scaler_op(&[0.5, 0.5, 0.5], &[2.0, 2.0, 2.0])
            .unwrap();
        let s = b.finish(3).unwrap().unwrap();
        assert_eq!(
            (s.kind, s.offset, s.scale),
            (ScalerKind::Uniform, vec![0.5], vec![2.0])
        );
    }

    #[test]
    fn scaler_op_broadcasts_a_single_value() {
        let mut a = Affine::default();
        a.apply_scaler_op(&[1.0], &[2.0, 4.0]).unwrap();
        let s = a.finish(2).unwrap().unwrap();
        assert_eq!(s.kind, ScalerKind::Standardise);
        assert_eq!(s.offset, vec![1.0, 1.0]);
        assert_eq!(s.scale, vec![2.0, 4.0]);
    }

    #[test]
    fn composed_chain_matches_step_by_step_arithmetic() {
        // ((x - 1) * 3 + 2) / 4, then 10 - y: worked by hand for x = 5:
        // (5-1)*3 = 12; +2 = 14; /4 = 3.5; 10 - 3.5 = 6.5.
        let mut a = Affine::default();
        a.apply(Step::Sub, &[1.0]).unwrap();
        a.apply(Step::Mul, &[3.0]).unwrap();
        a.apply(Step::Add, &[2.0]).unwrap();
        a.apply(Step::Div, &[4.0]).unwrap();
        a.apply(Step::SubFrom, &[10.0]).unwrap();
        let s = a.finish(1).unwrap().unwrap();
        assert!((run(&s, &[5.0])[0] - 6.5).abs() < 1e-6);
        assert!((run(&s, &[-3.0])[0] - (10.0 - ((-4.0 * 3.0 + 2.0) / 4.0))).abs() < 1e-6);
    }

    #[test]
    fn zero_scale_with_added_constant_is_rejected() {
        let mut a = Affine::default();
        a.apply(Step::Mul, &[0.0, 1.0]).unwrap();
        let e = a.apply(Step::Add, &[1.0, 1.0]).unwrap_err();
        assert!(e.contains("feature 0") && e.contains("scale is 0"), "{e}");
        // Zero scale with nothing added is representable: offset 0, scale 0.
        let mut b = Affine::default();
        b.apply(Step::Mul, &[0.0, 1.0]).unwrap();
        b.apply(Step::Add, &[0.0, 1.0]).unwrap();
        let s = b.finish(2).unwrap().unwrap();
        assert_eq!(s.scale, vec![0.0, 1.0]);
        assert_eq!(s.offset, vec![0.0, -1.0]);
    }

    #[test]
    fn division_by_zero_and_width_mismatch_are_rejected() {
        let mut a = Affine::default();
        assert!(a
            .apply(Step::Div, &[1.0, 0.0])
            .unwrap_err()
            .contains("division by zero for feature 1"));
        let mut b = Affine::default();
        b.apply(Step::Sub, &[1.0, 2.0]).unwrap();
        assert!(b.apply(Step::Mul, &[1.0, 2.0, 3.0]).is_err());
        let mut c = Affine::default();
        c.apply(Step::Sub, &[1.0, 2.0]).unwrap();
        assert!(c.finish(3).unwrap_err().contains("takes 3 inputs"));
    }

    #[test]
    fn no_steps_means_no_scaler() {
        assert_eq!(Affine::default().finish(4).unwrap(), None);
    }
}
