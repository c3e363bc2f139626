//! Shapes of the data before the first dense layer: `Flatten` and `Reshape` that turn
//! `[N, d1, d2, ...]` into `[N, features]`, and matching per-feature constants against them.
//! Dim 0 is the batch; `None` marks a dimension whose size is not known.

use super::super::attr;
use super::super::error::OnnxImportError;
use super::super::node::Node;
use super::super::normalise::Walk;
use super::{constant_input, shape_value};

/// A tracked shape; dim 0 is the batch.
pub type Shape = Vec<Option<usize>>;

/// Text for messages, `?` for unknown sizes.
pub fn text(s: &[Option<usize>]) -> String {
    let dims: Vec<String> = s
        .iter()
        .map(|d| d.map_or("?".to_string(), |v| v.to_string()))
        .collect();
    format!("[{}]", dims.join(", "))
}

/// Product of the non-batch dims, if all are known.
pub fn features(s: &[Option<usize>]) -> Option<usize> {
    s.get(1..)?
        .iter()
        .try_fold(1usize, |acc, d| acc.checked_mul((*d)?))
}

/// `Flatten` with `axis`: supported when it keeps the batch, i.e. axis 1 (or -(rank-1)).
pub fn flatten(s: &[Option<usize>], axis: i64) -> Result<Shape, String> {
    let rank = s.len() as i64;
    let a = if axis < 0 { axis + rank } else { axis };
    if a != 1 {
        return Err(format!(
            "Flatten with axis {axis} on a tensor of shape {}; supported: axis 1, which keeps the batch dimension",
            text(s)
        ));
    }
    Ok(vec![s.first().copied().flatten(), features(s)])
}

/// `Reshape` to `target` (the constant shape input): supported when the result is
/// `[N, features]` with the batch kept (`0` or `-1` in front, or the known batch size).
pub fn reshape(s: &[Option<usize>], target: &[i64], allow_zero: bool) -> Result<Shape, String> {
    let batch = s.first().copied().flatten();
    let feats = features(s);
    let bad = |why: &str| {
        Err(format!(
            "Reshape of shape {} to {target:?}: {why}; supported: a reshape to [N, features] that keeps the batch dimension (such as [-1, F] or [0, -1])",
            text(s)
        ))
    };
    let [t0, t1] = target else {
        return bad("the target is not 2-D");
    };
    if allow_zero && (*t0 == 0 || *t1 == 0) {
        return bad("allowzero = 1 with a 0 in the target");
    }
    let keeps_batch = |t: i64, other_inferred: bool| match t {
        0 => true,
        -1 => !other_inferred,
        n => batch.is_some_and(|b| b as i64 == n),
    };
    let f = match *t1 {
        n if n > 0 => {
            if feats.is_some_and(|f| f as i64 != n) {
                return bad("the feature count does not match");
            }
            if !keeps_batch(*t0, false) {
                return bad("the batch dimension is not kept");
            }
            Some(n as usize)
        }
        -1 => {
            if !keeps_batch(*t0, true) {
                return bad("the batch dimension is not kept");
            }
            feats
        }
        0 if s.len() == 2 => {
            if !keeps_batch(*t0, false) {
                return bad("the batch dimension is not kept");
            }
            s.get(1).copied().flatten()
        }
        _ => return bad("the feature dimension is not supported"),
    };
    Ok(vec![batch, f])
}

/// A constant used element-wise on data of shape `s`: a single value, or exactly one value per
/// feature laid out like the data (leading 1s ignored), with no broadcasting that repeats
/// values along a data dimension.
pub fn per_feature<'v>(
    s: &[Option<usize>],
    dims: &[usize],
    values: &'v [f32],
) -> Result<&'v [f32], String> {
    if values.len() == 1 {
        return Ok(values);
    }
    let strip = |d: &[usize]| {
        d.iter()
            .skip_while(|&&x| x == 1)
            .copied()
            .collect::<Vec<_>>()
    };
    let cdims = strip(dims);
    let data: Vec<Option<usize>> = s
        .get(1..)
        .unwrap_or(&[])
        .iter()
        .copied()
        .skip_while(|d| *d == Some(1))
        .collect();
    let same = cdims.len() == data.len()
        && cdims
            .iter()
            .zip(&data)
            .all(|(c, d)| d.is_none_or(|d| d == *c));
    if dims.len() > s.len() || !same {
        return Err(format!(
            "a constant of shape {dims:?} does not match the data's features {}; supported: a single value or one value per feature",
            text(s)
        ));
    }
    Ok(values)
}

/// The graph walk's handlers of these ops.
impl<'g> Walk<'g, '_> {
    /// `Flatten`: the data's shape, flattened from `axis`.
    pub(in super::super) fn flatten(&mut self, n: Node<'g>) -> Result<(), OnnxImportError> {
        let axis = attr::int_or(n.proto, "axis", 1).map_err(|e| n.err(e))?;
        self.shape = flatten(&self.shape, axis).map_err(|e| n.err(e))?;
        Ok(())
    }

    /// `Reshape` by a constant target shape, or by one computed from the data's shape.
    pub(in super::super) fn reshape(&mut self, n: Node<'g>) -> Result<(), OnnxImportError> {
        let allow_zero = attr::int_or(n.proto, "allowzero", 0).map_err(|e| n.err(e))? != 0;
        if let Some(v) = n.input(1).and_then(|i| self.shape_values.get(i)) {
            // The batch size becomes 0, "copy dim 0", which needs allowzero = 0.
            if allow_zero && v.dims.contains(&shape_value::Dim::Known(0)) {
                return Err(n.err("allowzero = 1 with a 0 in the computed target; supported: a reshape to [N, features] that keeps the batch dimension"));
            }
            let target = shape_value::reshape_target(v).map_err(|e| n.err(e))?;
            self.shape = reshape(&self.shape, &target, false).map_err(|e| n.err(e))?;
            return Ok(());
        }
        let t = constant_input(self.g, &n, 1, "shape")?;
        let target = t.ints().map_err(|e| n.err(e))?;
        self.shape = reshape(&self.shape, target, allow_zero).map_err(|e| n.err(e))?;
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const IMG: [Option<usize>; 4] = [None, Some(1), Some(28), Some(28)];

    #[test]
    fn flatten_keeps_batch() {
        assert_eq!(flatten(&IMG, 1).unwrap(), vec![None, Some(784)]);
        assert_eq!(
            flatten(&[None, Some(3), Some(4)], -2).unwrap(),
            vec![None, Some(12)]
        );
        assert!(flatten(&IMG, 0).unwrap_err().contains("axis 0"));
        assert!(flatten(&IMG, 2).is_err());
        assert_eq!(
            flatten(&[None, None, Some(2)], 1).unwrap(),
            vec![None, None]
        );
    }

    #[test]
    fn reshape_forms() {
        assert_eq!(
            reshape(&IMG, &[-1, 784], false).unwrap(),
            vec![None, Some(784)]
        );
        assert_eq!(
            reshape(&IMG, &[0, -1], false).unwrap(),
            vec![None, Some(784)]
        );
        assert_eq!(
            reshape(&IMG, &[0, 784], false).unwrap(),
            vec![None, Some(784)]
        );
        let fixed = [Some(1), Some(2), Some(2)];
        assert_eq!(
            reshape(&fixed, &[1, 4], false).unwrap(),
            vec![Some(1), Some(4)]
        );
        assert_eq!(
            reshape(&[None, Some(5)], &[-1, 0], false).unwrap(),
            vec![None, Some(5)]
        );
        assert!(reshape(&IMG, &[-1, 28, 28], false)
            .unwrap_err()
            .contains("not 2-D"));
        assert!(reshape(&IMG, &[-1, 100], false)
            .unwrap_err()
            .contains("feature count"));
        assert!(reshape(&IMG, &[-1, -1], false).is_err());
        assert!(reshape(&IMG, &[7, -1], false)
            .unwrap_err()
            .contains("batch"));
        assert!(reshape(&IMG, &[0, -1], true)
            .unwrap_err()
            .contains("allowzero"));
    }

    #[test]
    fn per_feature_constants() {
        let v = [1.0f32; 784];
        assert!(per_feature(&IMG, &[1, 1, 28, 28], &v).is_ok());
        assert!(per_feature(&IMG, &[28, 28], &v).is_ok());
        assert!(per_feature(&[None, Some(784)], &[784], &v).is_ok());
        assert!(per_feature(&[None, Some(784)], &[1, 784], &v).is_ok());
        assert!(per_feature(&IMG, &[], &[2.0]).is_ok());
        // [28] would repeat along the rows: rejected.
        assert!(per_feature(&IMG, &[28], &v[..28]).is_err());
        assert!(per_feature(&[None, Some(3)], &[2], &v[..2])
            .unwrap_err()
            .contains("[2]"));
    }

    #[test]
    fn features_and_text() {
        assert_eq!(features(&IMG), Some(784));
        assert_eq!(features(&[None, None]), None);
        assert_eq!(text(&IMG), "[?, 1, 28, 28]");
    }
}
