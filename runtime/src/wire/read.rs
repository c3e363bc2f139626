//! Decoding the postcard body (`FORMAT.md` §3) into a layer table in place.
//!
//! The derived `Deserialize` builds every value on the stack and moves it outwards: a layer
//! into the layer vector, the vector into the table, the table into its `Result`, then into
//! the `Model`. On a Cortex-M each move of the 548-byte layer vector is a `memcpy` call, and
//! together they were most of `Model::parse`'s stack. Here each visitor writes into the place
//! that keeps the value ([`read_into`] fills the `Model`'s own table), and the wire format is
//! the derive's, field for field.
use super::format::{
    Activation, InputQuantDesc, InputWidth, LayerDesc, LayerQuantDesc, ModelDesc, OutputKind,
    Precision, WeightLayout, MAX_LAYERS,
};
use serde::de::{DeserializeSeed, Error, SeqAccess, Visitor};
use serde::{Deserialize, Deserializer};

impl ModelDesc<'_> {
    /// A table with no layers, for [`read_into`] to fill. (A function, not a constant: a
    /// constant would be a 612-byte image in flash, copied; this stores the few fields.)
    pub const fn empty() -> ModelDesc<'static> {
        ModelDesc {
            input_len: 0,
            precision: Precision::Int8,
            scaler: None,
            input_quant: None,
            layers: heapless::Vec::new(),
            output: OutputKind::Logits,
            labels: "",
        }
    }
}

impl LayerDesc<'_> {
    /// A 0 → 0 layer, for the reader to fill.
    pub const fn empty() -> LayerDesc<'static> {
        LayerDesc {
            inputs: 0,
            outputs: 0,
            activation: Activation::Linear,
            act_kind: 0,
            act_zero_point: 0,
            act_data: &[],
            layout: WeightLayout::OutputMajor,
            weights: &[],
            bias: &[],
            quant: None,
        }
    }
}

/// Decodes a blob body into `desc` (which should be [`ModelDesc::empty()`]) and returns the
/// bytes after it. On an error `desc` holds what was read so far: discard it.
pub fn read_into<'a>(body: &'a [u8], desc: &mut ModelDesc<'a>) -> postcard::Result<&'a [u8]> {
    let mut de = postcard::Deserializer::from_bytes(body);
    Table(desc).deserialize(&mut de)?;
    de.finalize()
}

fn missing<E: Error>() -> E {
    E::invalid_length(0, &"every field")
}

/// Fills a table.
struct Table<'d, 'a>(&'d mut ModelDesc<'a>);

impl<'de: 'a, 'a> DeserializeSeed<'de> for Table<'_, 'a> {
    type Value = ();
    fn deserialize<D: Deserializer<'de>>(self, d: D) -> Result<(), D::Error> {
        // Postcard reads a struct as a tuple of this many fields.
        // The input quantisation counts as two: its tag, then its record.
        const FIELDS: [&str; 8] = [
            "input_len",
            "precision",
            "scaler",
            "input_quant",
            "input_quant_record",
            "layers",
            "output",
            "labels",
        ];
        d.deserialize_struct("ModelDesc", &FIELDS, self)
    }
}

impl<'de: 'a, 'a> Visitor<'de> for Table<'_, 'a> {
    type Value = ();
    fn expecting(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        f.write_str("a layer table")
    }
    fn visit_seq<A: SeqAccess<'de>>(self, mut s: A) -> Result<(), A::Error> {
        let m = self.0;
        m.input_len = s.next_element()?.ok_or_else(missing)?;
        m.precision = s.next_element()?.ok_or_else(missing)?;
        m.scaler = s.next_element()?.ok_or_else(missing)?;
        // The input quantisation's three-way tag (`FORMAT.md` §3): `0` none, `1` int8, `2`
        // int16 (version 7), then the record. Tags `0` and `1` are an `Option`'s bytes.
        m.input_quant = match s.next_element::<u8>()?.ok_or_else(missing)? {
            0 => None,
            tag @ (1 | 2) => {
                let mut q: InputQuantDesc<'a> = s.next_element()?.ok_or_else(missing)?;
                if tag == 2 {
                    q.width = InputWidth::I16;
                }
                Some(q)
            }
            _ => {
                return Err(A::Error::invalid_value(
                    serde::de::Unexpected::Other("input quantisation tag"),
                    &"0, 1 or 2",
                ))
            }
        };
        s.next_element_seed(Layers(&mut m.layers))?
            .ok_or_else(missing)?;
        m.output = s.next_element()?.ok_or_else(missing)?;
        m.labels = s.next_element()?.ok_or_else(missing)?;
        Ok(())
    }
}

/// Fills the layer vector, each layer in its slot.
struct Layers<'d, 'a>(&'d mut heapless::Vec<LayerDesc<'a>, MAX_LAYERS>);

impl<'de: 'a, 'a> DeserializeSeed<'de> for Layers<'_, 'a> {
    type Value = ();
    fn deserialize<D: Deserializer<'de>>(self, d: D) -> Result<(), D::Error> {
        d.deserialize_seq(self)
    }
}

impl<'de: 'a, 'a> Visitor<'de> for Layers<'_, 'a> {
    type Value = ();
    fn expecting(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        write!(f, "at most {MAX_LAYERS} layers")
    }
    fn visit_seq<A: SeqAccess<'de>>(self, mut s: A) -> Result<(), A::Error> {
        let v = self.0;
        v.clear();
        while v.push(LayerDesc::empty()).is_ok() {
            let Some(slot) = v.last_mut() else {
                break;
            };
            if s.next_element_seed(Layer(slot))?.is_none() {
                v.pop();
                return Ok(());
            }
        }
        // Full: postcard knows how many layers are left, and any is one too many.
        match s.size_hint() {
            Some(0) => Ok(()),
            _ => Err(A::Error::invalid_length(
                MAX_LAYERS + 1,
                &"at most 8 layers",
            )),
        }
    }
}

/// Fills one layer.
struct Layer<'d, 'a>(&'d mut LayerDesc<'a>);

impl<'de: 'a, 'a> DeserializeSeed<'de> for Layer<'_, 'a> {
    type Value = ();
    fn deserialize<D: Deserializer<'de>>(self, d: D) -> Result<(), D::Error> {
        // Postcard reads a struct as a tuple of this many elements; the activation's parts
        // count as up to four, the quantisation's as up to six.
        const FIELDS: [&str; 15] = [
            "inputs",
            "outputs",
            "activation",
            "kind",
            "input_zero_point",
            "data",
            "layout",
            "weights",
            "bias",
            "quant",
            "weight_scale",
            "multiplier",
            "shift",
            "output_scale",
            "output_zero_point",
        ];
        d.deserialize_struct("LayerDesc", &FIELDS, self)
    }
}

impl<'de: 'a, 'a> Visitor<'de> for Layer<'_, 'a> {
    type Value = ();
    fn expecting(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        f.write_str("a layer")
    }
    fn visit_seq<A: SeqAccess<'de>>(self, mut s: A) -> Result<(), A::Error> {
        let l = self.0;
        l.inputs = s.next_element()?.ok_or_else(missing)?;
        l.outputs = s.next_element()?.ok_or_else(missing)?;
        // The activation enum, read as its parts: the variant index (a postcard varint, one
        // byte below 128: a `u8`), then for `Pointwise` the record's three fields.
        match s.next_element::<u8>()?.ok_or_else(missing)? {
            0 => l.activation = Activation::Linear,
            1 => l.activation = Activation::Relu,
            2 => {
                l.activation = Activation::Pointwise;
                l.act_kind = s.next_element()?.ok_or_else(missing)?;
                l.act_zero_point = s.next_element()?.ok_or_else(missing)?;
                l.act_data = s.next_element()?.ok_or_else(missing)?;
            }
            _ => {
                return Err(A::Error::invalid_value(
                    serde::de::Unexpected::Other("activation"),
                    &"0, 1 or 2",
                ))
            }
        }
        l.layout = s.next_element()?.ok_or_else(missing)?;
        l.weights = s.next_element()?.ok_or_else(missing)?;
        l.bias = s.next_element()?.ok_or_else(missing)?;
        // `Option<LayerQuantDesc>` read as its parts too: the tag byte (0 or 1, as postcard
        // writes it), then the five fields.
        l.quant = match s.next_element::<u8>()?.ok_or_else(missing)? {
            0 => None,
            1 => Some(LayerQuantDesc {
                weight_scale: s.next_element()?.ok_or_else(missing)?,
                multiplier: s.next_element()?.ok_or_else(missing)?,
                shift: s.next_element()?.ok_or_else(missing)?,
                output_scale: s.next_element()?.ok_or_else(missing)?,
                output_zero_point: s.next_element()?.ok_or_else(missing)?,
            }),
            _ => {
                return Err(A::Error::invalid_value(
                    serde::de::Unexpected::Other("option tag"),
                    &"0 or 1",
                ))
            }
        };
        Ok(())
    }
}

impl<'de: 'a, 'a> Deserialize<'de> for LayerDesc<'a> {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        let mut l = LayerDesc::empty();
        Layer(&mut l).deserialize(d)?;
        Ok(l)
    }
}

impl<'de: 'a, 'a> Deserialize<'de> for ModelDesc<'a> {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        let mut m = ModelDesc::empty();
        Table(&mut m).deserialize(d)?;
        Ok(m)
    }
}
