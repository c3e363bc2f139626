//! Every check a reader must make on a decoded layer table (`FORMAT.md` §5), done once.
//! After [`check`] succeeds, inference cannot index out of bounds or overflow.
use crate::error::{FormatError, TensorKind};
use crate::le;
use crate::scratch::ScratchPlan;
use crate::wire::format::{
    InputQuantDesc, InputWidth, LayerDesc, ModelDesc, OutputKind, Precision, WeightLayout,
    MAX_INPUT_SHIFT, MAX_WIDTH,
};
use crate::wire::layout;
use crate::wire::nibble;
use crate::wire::version::keeps_weight_scales;

/// Largest addend of the integer input path (keeps its 64-bit sum from overflowing).
const MAX_INPUT_ADD: i64 = 1 << 62;

fn width(v: u32, layer: Option<u8>) -> Result<usize, FormatError> {
    if v == 0 {
        return Err(FormatError::ZeroSized { layer });
    }
    if v > MAX_WIDTH {
        return Err(FormatError::TooWide { layer });
    }
    Ok(v as usize)
}

fn expect_len(
    bytes: &[u8],
    len: usize,
    layer: Option<u8>,
    tensor: TensorKind,
) -> Result<(), FormatError> {
    if bytes.len() == len {
        Ok(())
    } else {
        Err(FormatError::TensorLength { layer, tensor })
    }
}

fn finite(bytes: &[u8], layer: Option<u8>, tensor: TensorKind) -> Result<(), FormatError> {
    if le::f32s(bytes).all(f32::is_finite) {
        Ok(())
    } else {
        Err(FormatError::NonFinite { layer, tensor })
    }
}

/// A quantisation scale must be finite and positive, and small enough that the largest real
/// value its int8 tensor holds, `(q - zero_point) * s` with `|q - zero_point|` up to
/// `max(127 - zp, zp + 128)`, is finite too (else a dequantised score would be infinite).
/// Not inlined: it has several call sites, and parse time does not matter (flash does).
#[inline(never)]
fn good_scale(s: f32, zero_point: i8, layer: Option<u8>) -> Result<(), FormatError> {
    let steps = (127 - i16::from(zero_point)).max(i16::from(zero_point) + 128);
    if scale_fits(s.to_bits(), steps.unsigned_abs()) {
        Ok(())
    } else {
        Err(FormatError::BadScale { layer })
    }
}

/// Whether the f32 with bits `b` is finite and positive and its product with `steps`
/// (`1..=65535`) rounds to a finite f32: `s.is_finite() && s > 0.0 && (s * steps).is_finite()`,
/// in integer arithmetic, so that parsing needs no float routine on a core without an FPU.
///
/// `s = m · 2^e` exactly (`m` the 24-bit significand). IEEE-754 round-to-nearest-even turns
/// a product into infinity exactly when it is at least `f32::MAX` plus half its last-place
/// unit, `(2^25 - 1) · 2^103` (the tie rounds to the even neighbour, `2^128`).
fn scale_fits(b: u32, steps: u16) -> bool {
    // Sign bit set (negative or -0.0), +0.0, infinity and NaN.
    if b == 0 || b >= 0x7F80_0000 {
        return false;
    }
    let (exp, frac) = (b >> 23, u64::from(b & 0x007F_FFFF));
    let (m, e) = if exp == 0 {
        (frac, -149)
    } else {
        (frac | 1 << 23, exp as i32 - 150)
    };
    let product = m * u64::from(steps); // < 2^40
    let limit = (1u64 << 25) - 1;
    match 103 - e {
        // (2^25 - 1) · 2^16 already exceeds every product.
        16.. => true,
        k @ 0..=15 => product < limit << k,
        // e = 104, the largest exponent: compare product · 2 with the limit.
        _ => product << 1 < limit,
    }
}

fn check_input_quant(q: &InputQuantDesc<'_>, input_len: usize) -> Result<(), FormatError> {
    match q.width {
        InputWidth::I8 => good_scale(q.scale, q.zero_point, None)?,
        // Without the `int16-input` feature its kernels are not built.
        InputWidth::I16 if !cfg!(feature = "int16-input") => {
            return Err(FormatError::Int16InputNotBuiltIn)
        }
        // Symmetric: the widest step from zero is 32,768.
        InputWidth::I16 if q.zero_point != 0 => return Err(FormatError::InputZeroPoint),
        InputWidth::I16 if !scale_fits(q.scale.to_bits(), 32_768) => {
            return Err(FormatError::BadScale { layer: None })
        }
        InputWidth::I16 => {}
    }
    // `n = 0`: the integer input path is left out (version 5, `FORMAT.md` §3.4); then all three
    // tables must be empty, as the length checks below require.
    let n = q.int_shift.len();
    if n != 0 && n != 1 && n != input_len {
        return Err(FormatError::TensorLength {
            layer: None,
            tensor: TensorKind::IntegerInput,
        });
    }
    expect_len(q.int_mult, 4 * n, None, TensorKind::IntegerInput)?;
    expect_len(q.int_add, 8 * n, None, TensorKind::IntegerInput)?;
    for (i, (&s, add)) in q.int_shift.iter().zip(le::i64s(q.int_add)).enumerate() {
        if s > MAX_INPUT_SHIFT || !(-MAX_INPUT_ADD..=MAX_INPUT_ADD).contains(&add) {
            return Err(FormatError::ShiftOutOfRange {
                layer: None,
                channel: i as u32,
            });
        }
    }
    Ok(())
}

fn check_layer(
    l: &LayerDesc<'_>,
    k: u8,
    prev: usize,
    precision: Precision,
    scales: bool,
    input: InputWidth,
) -> Result<usize, FormatError> {
    let at = Some(k);
    let inputs = width(l.inputs, at)?;
    let outputs = width(l.outputs, at)?;
    if inputs != prev {
        return Err(FormatError::ShapeMismatch { layer: k });
    }
    let elem = precision.accepted_bytes();
    let weights = match l.layout {
        WeightLayout::OutputMajor => {
            expect_len(l.weights, inputs * outputs * elem, at, TensorKind::Weights)?;
            l.weights
        }
        WeightLayout::Blocked4x4 => check_blocked(l.weights, inputs, outputs, precision, at)?,
        // Without the `int4` feature the int4 kernels are not built.
        WeightLayout::Nibble4x4 if !cfg!(feature = "int4") => {
            return Err(FormatError::Int4NotBuiltIn { layer: k });
        }
        // int4 weights belong to int8 models only, and read int8 inputs only (the first
        // layer of an int16-input model has int8 weights, `FORMAT.md` §3.6).
        WeightLayout::Nibble4x4 if precision != Precision::Int8 || input != InputWidth::I8 => {
            return Err(FormatError::PrecisionMismatch { layer: at });
        }
        WeightLayout::Nibble4x4 => check_nibbles(l.weights, inputs, outputs, at)?,
    };
    expect_len(l.bias, 4 * outputs, at, TensorKind::Bias)?;
    check_activation(l, k, precision)?;
    match (precision, &l.quant) {
        // Without the `f32` feature, `check` has already refused f32 models.
        (Precision::F32, None) if cfg!(feature = "f32") => {
            finite(weights, at, TensorKind::Weights)?;
            finite(l.bias, at, TensorKind::Bias)?;
        }
        (Precision::Int8, Some(q)) => {
            // Empty when the report-only weight scales are left out (version 5).
            let n = if scales { 4 * outputs } else { 0 };
            expect_len(q.weight_scale, n, at, TensorKind::WeightScale)?;
            expect_len(q.multiplier, 4 * outputs, at, TensorKind::Multiplier)?;
            expect_len(q.shift, outputs, at, TensorKind::Shift)?;
            finite(q.weight_scale, at, TensorKind::WeightScale)?;
            good_scale(q.output_scale, q.output_zero_point, at)?;
            for (c, m) in le::i32s(q.multiplier).enumerate() {
                if m < (1 << 30) {
                    return Err(FormatError::MultiplierOutOfRange {
                        layer: k,
                        channel: c as u32,
                    });
                }
            }
            for (c, &s) in q.shift.iter().enumerate() {
                if !(-31..=31).contains(&(s as i8)) {
                    return Err(FormatError::ShiftOutOfRange {
                        layer: Some(k),
                        channel: c as u32,
                    });
                }
            }
            // |bias| + 128 · Σ|w| bounds the accumulator for every int8 input (int4 weights
            // included: they are exact int8 values in [-8, 7]); 32,768 · Σ|w| for an int16 one.
            let reach = input.reach();
            for (c, b) in le::i32s(l.bias).enumerate() {
                let sum = abs_row_sum(weights, l.layout, inputs, c);
                if i64::from(b).abs() + reach * sum > i64::from(i32::MAX) {
                    return Err(FormatError::AccumulatorOverflow {
                        layer: k,
                        channel: c as u32,
                    });
                }
            }
        }
        _ => return Err(FormatError::PrecisionMismatch { layer: at }),
    }
    Ok(outputs)
}

/// A pointwise activation record (`FORMAT.md` §3.3, §5 rule 18). The int8-only build checks
/// only what its path uses, the kind byte and the table's length; the parameter decoding is
/// compiled with `f32` alone.
fn check_activation(l: &LayerDesc<'_>, k: u8, precision: Precision) -> Result<(), FormatError> {
    let Some(p) = l.pointwise() else {
        return Ok(());
    };
    if p.kind >= crate::unstable::pointwise::KINDS {
        return Err(FormatError::UnknownActivation {
            layer: k,
            kind: p.kind,
        });
    }
    let bad = FormatError::ActivationRecord { layer: k };
    match precision {
        Precision::Int8 if p.data.len() != crate::unstable::pointwise::TABLE_LEN => Err(bad),
        Precision::Int8 => Ok(()),
        #[cfg(feature = "f32")]
        Precision::F32 => {
            use crate::unstable::pointwise::{Kind, Pointwise};
            let kind = Kind::from_byte(p.kind).ok_or(bad)?;
            let pw = Pointwise::from_params(kind, p.data).ok_or(bad)?;
            if p.input_zero_point != 0 {
                return Err(bad);
            }
            if pw.params_ok() {
                Ok(())
            } else {
                Err(FormatError::ActivationParams { layer: k })
            }
        }
        // Without the `f32` feature, `check` has already refused f32 models.
        #[cfg(not(feature = "f32"))]
        Precision::F32 => Ok(()),
    }
}

/// Σ|w| over row `o` of int8 weights in `layout` (the data, without alignment bytes).
fn abs_row_sum(w: &[u8], l: WeightLayout, inputs: usize, o: usize) -> i64 {
    match l {
        WeightLayout::OutputMajor => w
            .get(o * inputs..(o + 1) * inputs)
            .unwrap_or(&[])
            .iter()
            .map(|&w| i64::from((w as i8).unsigned_abs()))
            .sum(),
        WeightLayout::Blocked4x4 => (0..inputs)
            .filter_map(|i| w.get(layout::index(o, i, inputs)))
            .map(|&b| i64::from(layout::decode_i8(b).unsigned_abs()))
            .sum(),
        #[cfg(feature = "int4")]
        WeightLayout::Nibble4x4 => (0..inputs)
            .filter_map(|i| nibble::get(w, o, i, inputs))
            .map(|v| i64::from(v.unsigned_abs()))
            .sum(),
        // Refused by `check_layer` without the `int4` feature.
        #[cfg(not(feature = "int4"))]
        WeightLayout::Nibble4x4 => 0,
    }
}

/// Checks a `Nibble4x4` weight field (`FORMAT.md` §3.5): its length, zero alignment bytes,
/// and zero padding weights (the nibble 8). Returns the data without the alignment bytes.
fn check_nibbles(
    field: &[u8],
    inputs: usize,
    outputs: usize,
    at: Option<u8>,
) -> Result<&[u8], FormatError> {
    let bad = FormatError::TensorLength {
        layer: at,
        tensor: TensorKind::Weights,
    };
    let (pad, data) = nibble::split(field, inputs, outputs).ok_or(bad)?;
    for o in 0..nibble::padded(outputs) {
        for i in 0..nibble::padded(inputs) {
            let padding = o >= outputs || i >= inputs;
            if padding && nibble::get(data, o, i, inputs) != Some(0) {
                return Err(FormatError::NonZeroPadding { layer: at });
            }
        }
    }
    if pad.iter().any(|&b| b != 0) {
        return Err(FormatError::NonZeroPadding { layer: at });
    }
    Ok(data)
}

/// Checks a `Blocked4x4` weight field: its length, zero alignment bytes, and zero padding
/// elements. Returns the data without the alignment bytes.
fn check_blocked(
    field: &[u8],
    inputs: usize,
    outputs: usize,
    precision: Precision,
    at: Option<u8>,
) -> Result<&[u8], FormatError> {
    let elem = precision.accepted_bytes();
    let bad = FormatError::TensorLength {
        layer: at,
        tensor: TensorKind::Weights,
    };
    let (pad, data) = layout::split(field, inputs, outputs, elem).ok_or(bad)?;
    let zero: &[u8] = match precision {
        Precision::Int8 => &[layout::ZERO_I8],
        Precision::F32 => &[0; 4],
    };
    let rows = layout::padded(outputs);
    let cols = layout::padded(inputs);
    for o in 0..rows {
        for i in 0..cols {
            let at_byte = layout::index(o, i, inputs) * elem;
            let padding = o >= outputs || i >= inputs;
            if padding && data.get(at_byte..at_byte + elem) != Some(zero) {
                return Err(FormatError::NonZeroPadding { layer: at });
            }
        }
    }
    if pad.iter().any(|&b| b != 0) {
        return Err(FormatError::NonZeroPadding { layer: at });
    }
    Ok(data)
}

/// Checks a decoded layer table; returns the scratch plan it needs.
pub(crate) fn check(d: &ModelDesc<'_>) -> Result<ScratchPlan, FormatError> {
    if d.precision == Precision::F32 && !cfg!(feature = "f32") {
        return Err(FormatError::F32NotBuiltIn);
    }
    let input_len = width(d.input_len, None)?;
    if let Some(s) = &d.scaler {
        let n = s.offset.len() / 4;
        if !s.offset.len().is_multiple_of(4) || (n != 1 && n != input_len) {
            return Err(FormatError::TensorLength {
                layer: None,
                tensor: TensorKind::ScalerOffset,
            });
        }
        expect_len(s.scale, s.offset.len(), None, TensorKind::ScalerScale)?;
        finite(s.offset, None, TensorKind::ScalerOffset)?;
        finite(s.scale, None, TensorKind::ScalerScale)?;
    }
    match (d.precision, &d.input_quant) {
        (Precision::Int8, Some(q)) => check_input_quant(q, input_len)?,
        (Precision::F32, None) => {}
        _ => return Err(FormatError::PrecisionMismatch { layer: None }),
    }
    if d.layers.is_empty() {
        return Err(FormatError::NoLayers);
    }
    // Weight scales are kept on every int8 layer or left out on every one (`FORMAT.md` §3.4),
    // as layer 0 has them: a layer that differs is a partial section (`TensorLength`).
    let scales = keeps_weight_scales(&d.layers);
    let mut prev = input_len;
    for (k, l) in d.layers.iter().enumerate() {
        // Only the first layer reads the input tensor.
        let input = if k == 0 {
            d.input_width_built()
        } else {
            InputWidth::I8
        };
        prev = check_layer(l, k as u8, prev, d.precision, scales, input)?;
    }
    if d.output == OutputKind::Sigmoid && prev != 1 {
        return Err(FormatError::SigmoidWidth);
    }
    if !d.labels.is_empty() {
        let classes = if d.output == OutputKind::Sigmoid {
            2
        } else {
            prev
        };
        // Byte count rather than `str::split` (see `Model::labels`): one more label than breaks.
        let found = d.labels.bytes().filter(|&b| b == b'\n').count() + 1;
        if found != classes {
            return Err(FormatError::LabelCount {
                expected: classes as u32,
                found: found as u32,
            });
        }
    }
    Ok(ScratchPlan::new(
        input_len,
        d.layers.iter().map(|l| l.outputs as usize),
        d.precision.accepted_bytes(),
    )
    .with_input_width(input_len, d.input_width_built()))
}

#[cfg(test)]
mod tests {
    use crate::error::{FormatError as E, TensorKind as T};
    use crate::wire::header::offset;
    use crate::Model;
    use kinglet_builder::le::{f32s, i32s};
    use kinglet_builder::sample::{tiny_f32, tiny_int8};
    use kinglet_builder::{
        raw_blob_with_layers, reseal, Activation, OutputKind, OwnedLayer, OwnedModel, Precision,
        WeightLayout,
    };

    /// Parses `m` encoded without the encoder's checks, with the scratch field the planner gives
    /// it (checked only once every other rule has passed).
    fn parse(m: &OwnedModel) -> Result<(), E> {
        Model::parse(&m.raw_blob()).map(|_| ())
    }

    fn with(f: impl FnOnce(&mut OwnedModel)) -> Result<(), E> {
        let mut m = tiny_int8();
        f(&mut m);
        parse(&m)
    }

    /// `scale_fits` against the float formula it replaces, around each product's overflow
    /// boundary, on random bit patterns and on the special values (x86-64 f32 multiplication
    /// is IEEE-754 correctly rounded, so the host is the reference).
    #[test]
    fn integer_scale_check_matches_the_float_one() {
        let float = |b: u32, steps: u16| {
            let s = f32::from_bits(b);
            s.is_finite() && s > 0.0 && (s * f32::from(steps)).is_finite()
        };
        let mut state = 0x1234_5678_u32; // xorshift32 (Marsaglia, 2003)
        let mut next = || {
            state ^= state << 13;
            state ^= state >> 17;
            state ^= state << 5;
            state
        };
        let specials = [
            0u32,
            1,
            2,
            0x007F_FFFF,
            0x0080_0000,
            0x3F80_0000,
            0x7F7F_FFFF,
            0x7F80_0000,
            0x7FC0_0000,
            0x8000_0000,
            0x8000_0001,
            0xBF80_0000,
            0xFF80_0000,
            0xFFFF_FFFF,
        ];
        // Under Miri (scripts/miri.sh), a sample of the same sweep: interpreted, the whole one
        // takes many minutes.
        let (steps_list, near, random): (Vec<u16>, u32, usize) = if cfg!(miri) {
            (vec![1, 128, 129, 200, 255], 40, 40)
        } else {
            ((1..=255).collect(), 3000, 2000)
        };
        for steps in steps_list {
            let edge = (f32::MAX / f32::from(steps)).to_bits();
            let around = (edge.saturating_sub(near)..=edge.saturating_add(near).min(0x7F80_0000))
                .chain(specials);
            for b in around {
                assert_eq!(
                    super::scale_fits(b, steps),
                    float(b, steps),
                    "bits {b:#010x} steps {steps}"
                );
            }
            for _ in 0..random {
                let b = next();
                assert_eq!(
                    super::scale_fits(b, steps),
                    float(b, steps),
                    "bits {b:#010x} steps {steps}"
                );
            }
        }
    }

    /// docs/bad-inputs.md R50 (the refusal is tested with `--no-default-features`).
    #[test]
    fn int4_blobs_need_the_int4_feature() {
        let blob = crate::embed_blob!("../../tests/fixtures/blobs/v6-digits-int4.kgl");
        let got = crate::Model::parse(blob).map(|_| ());
        if cfg!(feature = "int4") {
            assert_eq!(got, Ok(()));
        } else {
            assert_eq!(got, Err(E::Int4NotBuiltIn { layer: 0 }));
        }
        assert_eq!(
            E::Int4NotBuiltIn { layer: 0 }.to_string(),
            "layer 0: int4 weights, but this runtime was built without the `int4` feature"
        );
    }

    /// An int16-input blob (format version 7) without the `int16-input` feature (tested with
    /// `--no-default-features`).
    #[test]
    fn int16_input_blobs_need_the_int16_input_feature() {
        let blob = crate::embed_blob!("../../tests/fixtures/blobs/v7-digits-int16-input.kgl");
        let got = crate::Model::parse(blob).map(|_| ());
        if cfg!(feature = "int16-input") {
            assert_eq!(got, Ok(()));
        } else {
            assert_eq!(got, Err(E::Int16InputNotBuiltIn));
        }
        assert_eq!(
            E::Int16InputNotBuiltIn.to_string(),
            "int16 input tensor, but this runtime was built without the `int16-input` feature"
        );
    }

    #[test]
    fn valid_models_pass() {
        assert_eq!(parse(&tiny_int8()), Ok(()));
        let f32_model = if cfg!(feature = "f32") {
            Ok(())
        } else {
            Err(E::F32NotBuiltIn)
        };
        assert_eq!(parse(&tiny_f32()), f32_model);
        // docs/bad-inputs.md R33 (tested with `--no-default-features`).
        assert_eq!(
            E::F32NotBuiltIn.to_string(),
            "f32 model, but this runtime was built without the `f32` feature (int8 models only)"
        );
    }

    #[test]
    fn rejects_shape_faults() {
        assert_eq!(with(|m| m.layers.clear()), Err(E::NoLayers));
        assert_eq!(with(|m| m.input_len = 0), Err(E::ZeroSized { layer: None }));
        assert_eq!(
            with(|m| m.input_len = 20_000),
            Err(E::TooWide { layer: None })
        );
        assert_eq!(
            with(|m| m.layers[1].outputs = 0),
            Err(E::ZeroSized { layer: Some(1) })
        );
        assert_eq!(
            with(|m| m.layers[1].inputs = 5),
            Err(E::ShapeMismatch { layer: 1 })
        );
        assert_eq!(
            with(|m| m.layers[0].weights.pop().map(drop).unwrap_or(())),
            Err(E::TensorLength {
                layer: Some(0),
                tensor: T::Weights
            })
        );
        assert_eq!(
            with(|m| m.layers[1].bias.extend([0; 4])),
            Err(E::TensorLength {
                layer: Some(1),
                tensor: T::Bias
            })
        );
        // Nine layers: the table holds eight.
        let mut m = tiny_int8();
        let l = m.layers[1].clone();
        m.layers.truncate(1);
        for _ in 0..8 {
            m.layers.push(OwnedLayer {
                inputs: 4,
                outputs: 4,
                weights: vec![1; 16],
                bias: vec![0; 16],
                ..l.clone()
            });
            let q = m.layers.last_mut().unwrap().quant.as_mut().unwrap();
            q.weight_scale = f32s(&[0.01; 4]);
            q.multiplier = i32s(&[1 << 30; 4]);
            q.shift = vec![1; 4];
        }
        m.labels = String::new();
        let eight = m.as_desc(); // a table keeps the first eight
        assert_eq!(eight.layers.len(), 8);
        let mut all: Vec<_> = eight.layers.iter().copied().collect();
        all.push(all[7]);
        let nine = Model::parse(&raw_blob_with_layers(&eight, &all, 8)).map(|_| ());
        assert_eq!(nine, Err(E::Malformed), "more layers than the table holds");
    }

    #[test]
    fn rejects_quantisation_faults() {
        assert_eq!(
            with(|m| m.layers[0].quant.as_mut().unwrap().shift[2] = 32),
            Err(E::ShiftOutOfRange {
                layer: Some(0),
                channel: 2
            })
        );
        assert_eq!(
            with(|m| m.layers[0].quant.as_mut().unwrap().shift[1] = (-32i8) as u8),
            Err(E::ShiftOutOfRange {
                layer: Some(0),
                channel: 1
            })
        );
        assert_eq!(
            with(|m| m.layers[1].quant.as_mut().unwrap().multiplier =
                i32s(&[1 << 30, (1 << 30) - 1])),
            Err(E::MultiplierOutOfRange {
                layer: 1,
                channel: 1
            })
        );
        assert_eq!(
            with(|m| m.layers[1].quant.as_mut().unwrap().multiplier = i32s(&[-5, 1 << 30])),
            Err(E::MultiplierOutOfRange {
                layer: 1,
                channel: 0
            })
        );
        assert_eq!(
            with(|m| m.layers[0].quant.as_mut().unwrap().output_scale = 0.0),
            Err(E::BadScale { layer: Some(0) })
        );
        assert_eq!(
            with(|m| m.input_quant.as_mut().unwrap().scale = f32::NAN),
            Err(E::BadScale { layer: None })
        );
        assert_eq!(
            with(|m| m.input_quant.as_mut().unwrap().int_shift = vec![63]),
            Err(E::ShiftOutOfRange {
                layer: None,
                channel: 0
            })
        );
        assert_eq!(
            with(|m| m.input_quant.as_mut().unwrap().int_shift = vec![1, 2]),
            Err(E::TensorLength {
                layer: None,
                tensor: T::IntegerInput
            })
        );
        assert_eq!(
            with(|m| m.layers[0]
                .quant
                .as_mut()
                .unwrap()
                .shift
                .pop()
                .map(drop)
                .unwrap_or(())),
            Err(E::TensorLength {
                layer: Some(0),
                tensor: T::Shift
            })
        );
        assert_eq!(
            with(|m| m.layers[0].quant.as_mut().unwrap().weight_scale =
                f32s(&[0.1, f32::NAN, 0.1, 0.1])),
            Err(E::NonFinite {
                layer: Some(0),
                tensor: T::WeightScale
            })
        );
        assert_eq!(
            with(|m| m.layers[1].quant = None),
            Err(E::PrecisionMismatch { layer: Some(1) })
        );
        assert_eq!(
            with(|m| m.input_quant = None),
            Err(E::PrecisionMismatch { layer: None })
        );
        assert_eq!(
            with(|m| m.precision = Precision::F32),
            Err(if cfg!(feature = "f32") {
                E::PrecisionMismatch { layer: None }
            } else {
                E::F32NotBuiltIn
            })
        );
        // |bias| + 128 · Σ|w| must fit in i32.
        assert_eq!(
            with(|m| m.layers[0].bias = i32s(&[10, i32::MAX - 1919, 30, 400])),
            Err(E::AccumulatorOverflow {
                layer: 0,
                channel: 1
            })
        );
    }

    /// The int16 input's rules (`FORMAT.md` §3.6, §5 rules 3, 11, 13, 14): docs/bad-inputs.md
    /// R51, R52, R54 and R56.
    #[test]
    #[cfg(feature = "int16-input")]
    fn int16_input_is_checked() {
        use kinglet_builder::sample::tiny_int16_input;
        let wide = |f: &dyn Fn(&mut OwnedModel)| {
            let mut m = tiny_int16_input();
            f(&mut m);
            parse(&m)
        };
        assert_eq!(wide(&|_| {}), Ok(()));
        assert_eq!(
            wide(&|m| m.input_quant.as_mut().unwrap().zero_point = -10),
            Err(E::InputZeroPoint)
        );
        // 2e34 · 255 is finite, 2e34 · 32768 is not.
        assert_eq!(
            with(|m| m.input_quant.as_mut().unwrap().scale = 2e34),
            Ok(())
        );
        assert_eq!(
            wide(&|m| m.input_quant.as_mut().unwrap().scale = 2e34),
            Err(E::BadScale { layer: None })
        );
        // Layer 0's row 3 has Σ|w| = 33: 32768 · 33 + |bias| must fit in i32; the same bias
        // passes on an int8 input (128 · 33).
        let bias = i32::MAX - 32_768 * 33 + 1;
        let at_limit = |m: &mut OwnedModel| m.layers[0].bias = i32s(&[0, 0, 0, bias]);
        assert_eq!(
            wide(&at_limit),
            Err(E::AccumulatorOverflow {
                layer: 0,
                channel: 3
            })
        );
        assert_eq!(with(at_limit), Ok(()));
        assert_eq!(
            wide(&|m| m.layers[0].bias = i32s(&[0, 0, 0, bias - 1])),
            Ok(())
        );
        // Layer 1 reads int8 whatever the input: the int8 bound there (row 0: Σ|w| = 100).
        assert_eq!(
            wide(&|m| m.layers[1].bias = i32s(&[i32::MAX - 128 * 100 + 1, 0])),
            Err(E::AccumulatorOverflow {
                layer: 1,
                channel: 0
            })
        );
        // An int8-width table under a version-7 header, and the other way round.
        let mut narrow = tiny_int8().raw_blob();
        narrow[offset::VERSION..offset::VERSION + 2].copy_from_slice(&7u16.to_le_bytes());
        reseal(&mut narrow).unwrap();
        assert_eq!(
            Model::parse(&narrow).err(),
            Some(E::VersionMismatch { header: 7, body: 1 })
        );
        let mut blob = tiny_int16_input().raw_blob();
        blob[offset::VERSION..offset::VERSION + 2].copy_from_slice(&6u16.to_le_bytes());
        reseal(&mut blob).unwrap();
        assert_eq!(
            Model::parse(&blob).err(),
            Some(E::VersionMismatch { header: 6, body: 7 })
        );
    }

    /// `tiny_int8` with layer 0 in Blocked4x4 (field = `pad` zero bytes + data), as a blob of
    /// `version`; `poke` edits the field first.
    fn blocked_blob(pad: usize, version: u16, poke: impl Fn(&mut Vec<u8>)) -> Vec<u8> {
        use crate::wire::layout;
        let mut m = tiny_int8();
        let w: Vec<i8> = m.layers[0].weights.iter().map(|&b| b as i8).collect();
        let mut field = vec![0u8; pad + layout::elements(3, 4)];
        assert!(layout::block_i8(3, 4, &w, &mut field[pad..]));
        poke(&mut field);
        m.layers[0].layout = WeightLayout::Blocked4x4;
        m.layers[0].weights = field;
        let mut blob = m.raw_blob();
        blob[offset::VERSION..offset::VERSION + 2].copy_from_slice(&version.to_le_bytes());
        reseal(&mut blob).unwrap();
        blob
    }

    #[test]
    fn blocked_layout_is_checked() {
        for pad in 0..=3 {
            let blob = blocked_blob(pad, 2, |_| {});
            let m = Model::parse(&blob).expect("valid blocked blob");
            // Same forward pass as the output-major original (FORMAT.md §6).
            let mut scratch = [0u8; 7];
            let mut scores = [0f32; 2];
            let mut stages = Vec::new();
            m.infer_traced(
                crate::Input::F32(&[1.0, 2.0, 3.0]),
                &mut scratch,
                &mut scores,
                &mut |s| {
                    stages.push(
                        (0..s.values.len())
                            .filter_map(|i| s.values.int8(i))
                            .collect::<Vec<_>>(),
                    )
                },
            )
            .unwrap();
            assert_eq!(stages[1], vec![3, -5, -5, 100]);
        }
        let err = |b: Vec<u8>| Model::parse(&b).map(|_| ());
        let nz = Err(E::NonZeroPadding { layer: Some(0) });
        assert_eq!(err(blocked_blob(2, 2, |f| f[1] = 1)), nz, "alignment byte");
        assert_eq!(
            err(blocked_blob(0, 2, |f| f[3] = 0x81)),
            nz,
            "padding input"
        );
        assert_eq!(
            err(blocked_blob(0, 2, |f| f[7] = 0)),
            nz,
            "padding input of row 1"
        );
        let len = Err(E::TensorLength {
            layer: Some(0),
            tensor: T::Weights,
        });
        assert_eq!(
            err(blocked_blob(3, 2, |f| f.push(0))),
            len,
            "four alignment bytes"
        );
        assert_eq!(
            err(blocked_blob(0, 2, |f| {
                f.pop();
            })),
            len
        );
        assert_eq!(
            err(blocked_blob(0, 1, |_| {})),
            Err(E::VersionMismatch { header: 1, body: 2 }),
            "Blocked4x4 needs version 2"
        );
    }

    /// `tiny_int8` (FORMAT.md §6) with the one-vs-rest output, as a blob of `version`.
    fn one_vs_rest_blob(version: u16) -> Vec<u8> {
        let mut m = tiny_int8();
        m.output = OutputKind::OneVsRest;
        let mut blob = m.raw_blob();
        blob[offset::VERSION..offset::VERSION + 2].copy_from_slice(&version.to_le_bytes());
        reseal(&mut blob).unwrap();
        blob
    }

    #[test]
    fn one_vs_rest_output_needs_version_3() {
        let mut m = tiny_int8();
        m.output = OutputKind::OneVsRest;
        assert_eq!(u16::from_le_bytes([m.raw_blob()[4], m.raw_blob()[5]]), 3);
        let blob = one_vs_rest_blob(3);
        let model = Model::parse(&blob).expect("valid version-3 blob");
        // §6: the last layer dequantises to [-3.2, 3.1]; σ(-3.2) = 0.039166, σ(3.1) = 0.956893,
        // divided by their sum 0.996058: [0.039321, 0.960679] (float64 arithmetic, by hand).
        let mut scratch = [0u8; 7];
        let mut scores = [0f32; 2];
        let p = model
            .infer(
                crate::Input::F32(&[1.0, 2.0, 3.0]),
                &mut scratch,
                &mut scores,
            )
            .unwrap();
        assert_eq!(p.class, 1);
        assert!((scores[0] - 0.039_321).abs() < 1e-5, "{scores:?}");
        assert!((scores[1] - 0.960_679).abs() < 1e-5, "{scores:?}");
        for old in [1, 2] {
            assert_eq!(
                Model::parse(&one_vs_rest_blob(old)).map(|_| ()),
                Err(E::VersionMismatch {
                    header: old,
                    body: 3
                }),
                "a one-vs-rest output is version 3"
            );
        }
        // And version 3 holds nothing else: a softmax table under a version-3 header.
        let mut soft = tiny_int8().raw_blob();
        soft[offset::VERSION] = 3;
        reseal(&mut soft).unwrap();
        assert_eq!(
            Model::parse(&soft).map(|_| ()),
            Err(E::VersionMismatch { header: 3, body: 1 })
        );
    }

    #[test]
    fn rejects_scaler_output_and_label_faults() {
        assert_eq!(
            with(|m| m.scaler = Some((f32s(&[1.0, 2.0]), f32s(&[1.0, 2.0])))),
            Err(E::TensorLength {
                layer: None,
                tensor: T::ScalerOffset
            })
        );
        assert_eq!(
            with(|m| m.scaler = Some((f32s(&[1.0]), f32s(&[1.0, 2.0, 3.0])))),
            Err(E::TensorLength {
                layer: None,
                tensor: T::ScalerScale
            })
        );
        assert_eq!(
            with(|m| m.scaler = Some((f32s(&[f32::INFINITY]), f32s(&[1.0])))),
            Err(E::NonFinite {
                layer: None,
                tensor: T::ScalerOffset
            })
        );
        assert_eq!(
            with(|m| m.output = OutputKind::Sigmoid),
            Err(E::SigmoidWidth)
        );
        assert_eq!(
            with(|m| m.labels = "a\nb\nc".into()),
            Err(E::LabelCount {
                expected: 2,
                found: 3
            })
        );
        if !cfg!(feature = "f32") {
            return;
        }
        let mut f = tiny_f32();
        f.layers[0].weights = f32s(&[1.0, f32::NAN, 0.5, 0.5, -2.0, 1.0]);
        assert_eq!(
            parse(&f),
            Err(E::NonFinite {
                layer: Some(0),
                tensor: T::Weights
            })
        );
        let mut f = tiny_f32();
        f.labels = "healthy\nfaulty".into();
        assert_eq!(parse(&f), Ok(()), "a sigmoid model has two classes");
        f.layers[1].activation = Activation::Relu;
        assert_eq!(parse(&f), Ok(()));
    }

    #[test]
    fn rejects_scratch_trailing_and_garbage() {
        let m = tiny_int8();
        let d = m.as_desc();
        assert_eq!(
            Model::parse(&kinglet_builder::raw_blob(&d, 8)).map(|_| ()),
            Err(E::ScratchMismatch {
                header: 8,
                computed: 7
            })
        );
        // A valid table followed by one more byte (with a matching header and checksum).
        let mut blob = m.raw_blob();
        blob.push(0);
        reseal(&mut blob).unwrap();
        assert_eq!(Model::parse(&blob).map(|_| ()), Err(E::TrailingBytes));
        // A body that is not a layer table at all.
        let mut junk = m.raw_blob();
        junk.truncate(crate::HEADER_LEN);
        junk.extend([0xFF; 12]);
        reseal(&mut junk).unwrap();
        assert_eq!(Model::parse(&junk).map(|_| ()), Err(E::Malformed));
    }
}
