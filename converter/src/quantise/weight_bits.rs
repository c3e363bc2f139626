//! The weight precision of each layer of an int8 model: int8 (the default) or int4
//! (`runtime/FORMAT.md` §3.5). Activations stay int8 either way.
//!
//! Both are symmetric per output channel: `s = max |w| / q_max` over the row and
//! `w_q = clamp(round_half_even(w / s), −q_max, q_max)`, with `q_max` = 127 (int8) or 7 (int4).
//! The int4 grid is `[−7, 7]` and not `[−8, 7]`: symmetric like the int8 one, so `−w`
//! quantises to `−w_q` and the scale is set by the largest magnitude alone (the same formula
//! with 7 for 127); the format reads `−8` too.
use anyhow::{bail, Result};
use kinglet_runtime::unstable::wire::format::MAX_LAYERS;

/// The precision of one layer's weights.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum WeightBits {
    /// int8 weights in `[−127, 127]`.
    #[default]
    Int8,
    /// int4 weights in `[−7, 7]`, two per byte (format version 6).
    Int4,
}

impl WeightBits {
    /// The largest quantised magnitude: 127 or 7.
    pub const fn q_max(self) -> f32 {
        match self {
            WeightBits::Int8 => 127.0,
            WeightBits::Int4 => 7.0,
        }
    }

    /// The name the command line and reports use: `int8` or `int4`.
    pub const fn name(self) -> &'static str {
        match self {
            WeightBits::Int8 => "int8",
            WeightBits::Int4 => "int4",
        }
    }

    fn parse(s: &str) -> Option<Self> {
        match s {
            "int8" => Some(WeightBits::Int8),
            "int4" => Some(WeightBits::Int4),
            _ => None,
        }
    }
}

/// One [`WeightBits`] per layer, and which layers a list named (a list naming a layer the
/// model does not have is refused by [`LayerBits::check_layers`]).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub struct LayerBits {
    bits: [WeightBits; MAX_LAYERS],
    named: [bool; MAX_LAYERS],
}

impl LayerBits {
    /// Every layer at `bits`.
    pub const fn all(bits: WeightBits) -> Self {
        LayerBits {
            bits: [bits; MAX_LAYERS],
            named: [false; MAX_LAYERS],
        }
    }

    /// Layer `k`'s precision (int8 past the table).
    pub fn get(&self, k: usize) -> WeightBits {
        self.bits.get(k).copied().unwrap_or_default()
    }

    /// Sets layer `k`'s precision, naming it; `false` if `k` is past [`MAX_LAYERS`].
    pub fn set(&mut self, k: usize, bits: WeightBits) -> bool {
        match (self.bits.get_mut(k), self.named.get_mut(k)) {
            (Some(b), Some(n)) => {
                *b = bits;
                *n = true;
                true
            }
            _ => false,
        }
    }

    /// Whether any of the first `layers` layers is int4.
    pub fn any_int4(&self, layers: usize) -> bool {
        self.bits
            .iter()
            .take(layers)
            .any(|&b| b == WeightBits::Int4)
    }

    /// Parses `int8`, `int4` (every layer), or a list `K:BITS,...` of 0-based layer indices
    /// (the layers not named stay int8), e.g. `0:int4,1:int8`.
    pub fn parse(spec: &str) -> Result<Self> {
        let spec = spec.trim();
        if let Some(b) = WeightBits::parse(spec) {
            return Ok(LayerBits::all(b));
        }
        let mut out = LayerBits::default();
        for part in spec.split(',') {
            let Some((k, b)) = part.split_once(':') else {
                bail!("`{part}` is neither int8, int4 nor LAYER:BITS (e.g. 0:int4,1:int8)");
            };
            let Ok(k) = k.trim().parse::<usize>() else {
                bail!("`{}` is not a layer index (0, 1, ...)", k.trim());
            };
            let Some(b) = WeightBits::parse(b.trim()) else {
                bail!("`{}` is not a weight precision: int8 or int4", b.trim());
            };
            match out.named.get(k) {
                Some(true) => bail!("layer {k} is named twice"),
                Some(false) => {
                    out.set(k, b);
                }
                None => bail!("layer {k} is past the {MAX_LAYERS} layers a blob holds"),
            }
        }
        Ok(out)
    }

    /// Fails if a list named a layer at or past `layers`, one the model does not have.
    pub fn check_layers(&self, layers: usize) -> Result<()> {
        if let Some(k) = (layers..MAX_LAYERS).find(|&k| self.named.get(k) == Some(&true)) {
            bail!(
                "--weights names layer {k}, but the model has {layers} layers (0 to {})",
                layers.saturating_sub(1)
            );
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn specs_parse() {
        assert_eq!(
            LayerBits::parse("int4").unwrap(),
            LayerBits::all(WeightBits::Int4)
        );
        assert_eq!(LayerBits::parse("int8").unwrap(), LayerBits::default());
        let l = LayerBits::parse("0:int4, 2:int4,1:int8").unwrap();
        assert_eq!(
            (0..4).map(|k| l.get(k)).collect::<Vec<_>>(),
            [
                WeightBits::Int4,
                WeightBits::Int8,
                WeightBits::Int4,
                WeightBits::Int8
            ]
        );
        assert!(l.any_int4(3) && l.any_int4(1) && !LayerBits::default().any_int4(8));
        assert!(l.check_layers(3).is_ok());
        assert!(LayerBits::all(WeightBits::Int4).check_layers(1).is_ok());
        assert_eq!(
            l.check_layers(2).unwrap_err().to_string(),
            "--weights names layer 2, but the model has 2 layers (0 to 1)"
        );
        for (bad, msg) in [
            (
                "int2",
                "`int2` is neither int8, int4 nor LAYER:BITS (e.g. 0:int4,1:int8)",
            ),
            ("x:int4", "`x` is not a layer index (0, 1, ...)"),
            ("0:int3", "`int3` is not a weight precision: int8 or int4"),
            ("0:int4,0:int8", "layer 0 is named twice"),
            ("8:int4", "layer 8 is past the 8 layers a blob holds"),
        ] {
            assert_eq!(LayerBits::parse(bad).unwrap_err().to_string(), msg, "{bad}");
        }
    }
}
