//! Field-by-field mutations of a valid layer table, driven by fuzz bytes. Most mutations keep
//! the table close to valid (a consistent resize of a hidden layer, a bias just at the overflow
//! bound, a multiplier at the edge of its range) so that validation is exercised rule by rule
//! and accepted tables reach inference.
use arbitrary::{Result, Unstructured};
use kinglet_runtime::unstable::wire::format::{InputWidth, OutputKind, Precision, WeightLayout};

use kinglet_builder::{Activation, OwnedInput, OwnedLayer, OwnedModel, OwnedQuant};

/// Widest layer a mutation re-lays tensors for (keeps the harness's allocations small; wider
/// declared widths are still produced, with tensors that do not match them).
const MAX_EDIT_WIDTH: u32 = 256;

/// Interesting f32 values for scales, scaler entries and float weights.
const FLOATS: [f32; 16] = [
    0.0,
    -0.0,
    1.0,
    -1.0,
    0.5,
    1e-3,
    1e-20,
    1e-40, // subnormal
    1e20,
    3e38,
    f32::MAX,
    f32::MIN_POSITIVE,
    f32::NAN,
    f32::INFINITY,
    f32::NEG_INFINITY,
    255.0,
];

fn pick_f32(u: &mut Unstructured<'_>) -> Result<f32> {
    if u.ratio(1, 2)? {
        Ok(*u.choose(&FLOATS)?)
    } else {
        Ok(f32::from_bits(u.arbitrary()?))
    }
}

fn pick_i32(u: &mut Unstructured<'_>) -> Result<i32> {
    const EDGES: [i32; 10] = [
        0,
        1,
        -1,
        1 << 30,
        (1 << 30) - 1,
        i32::MAX,
        i32::MIN,
        i32::MAX - 1,
        1 << 31 >> 1,
        -(1 << 30),
    ];
    if u.ratio(1, 2)? {
        Ok(*u.choose(&EDGES)?)
    } else {
        u.arbitrary()
    }
}

fn pick_i64(u: &mut Unstructured<'_>) -> Result<i64> {
    const EDGES: [i64; 8] = [
        0,
        1,
        -1,
        1 << 62,
        (1 << 62) + 1,
        -(1 << 62),
        -(1 << 62) - 1,
        i64::MIN,
    ];
    if u.ratio(1, 2)? {
        Ok(*u.choose(&EDGES)?)
    } else {
        u.arbitrary()
    }
}

fn set_elem<const N: usize>(bytes: &mut [u8], i: usize, v: [u8; N]) {
    let n = bytes.len() / N;
    if n == 0 {
        return;
    }
    let at = (i % n) * N;
    bytes[at..at + N].copy_from_slice(&v);
}

/// Resizes a byte tensor to `len`, filling with `fill`.
fn resize(v: &mut Vec<u8>, len: usize, fill: u8) {
    v.resize(len, fill);
}

/// Element width of an activation/weight in `p`.
fn wbytes(p: Precision) -> usize {
    p.activation_bytes()
}

/// A valid int8 parameter set for `outputs` channels.
fn default_quant(outputs: usize) -> OwnedQuant {
    OwnedQuant {
        weight_scale: 0.01f32.to_le_bytes().repeat(outputs),
        multiplier: (1i32 << 30).to_le_bytes().repeat(outputs),
        shift: vec![4; outputs],
        output_scale: 0.05,
        output_zero_point: 0,
    }
}

/// Changes the output width of layer `k` (or the input width for `k == None`) to `w`, resizing
/// every tensor that depends on it so the table stays consistent.
pub fn reshape(m: &mut OwnedModel, k: Option<usize>, w: u32) {
    let eb = wbytes(m.precision);
    let wu = w as usize;
    let next = match k {
        None => {
            m.input_len = w;
            if let Some((o, s)) = &mut m.scaler {
                if o.len() != 4 {
                    resize(o, 4 * wu, 0);
                    resize(s, 4 * wu, 0x3f); // ~0.75 in the fill pattern
                }
            }
            if let Some(q) = &mut m.input_quant {
                if q.int_shift.len() != 1 {
                    resize(&mut q.int_mult, 4 * wu, 0);
                    resize(&mut q.int_add, 8 * wu, 0);
                    resize(&mut q.int_shift, wu, 0);
                }
            }
            0
        }
        Some(k) => {
            let Some(l) = m.layers.get_mut(k) else { return };
            if l.inputs > MAX_EDIT_WIDTH {
                return;
            }
            l.outputs = w;
            let inputs = l.inputs as usize;
            resize(&mut l.weights, inputs * wu * eb, 1);
            resize(&mut l.bias, 4 * wu, 0);
            if let Some(q) = &mut l.quant {
                let d = default_quant(wu);
                let keep = q.shift.len().min(wu);
                q.weight_scale.truncate(4 * keep);
                q.weight_scale
                    .extend_from_slice(&d.weight_scale[4 * keep..]);
                q.multiplier.truncate(4 * keep);
                q.multiplier.extend_from_slice(&d.multiplier[4 * keep..]);
                q.shift.truncate(keep);
                q.shift.extend_from_slice(&d.shift[keep..]);
            }
            k + 1
        }
    };
    if let Some(l) = m
        .layers
        .get_mut(next)
        .filter(|l| l.outputs <= MAX_EDIT_WIDTH)
    {
        // Re-lay the weights row by row so each row keeps its first values.
        let old_in = l.inputs as usize;
        let rows = l.outputs as usize;
        let mut wts = Vec::with_capacity(rows * wu * eb);
        for r in 0..rows {
            for i in 0..wu {
                let src = (r * old_in + i) * eb;
                if i < old_in && src + eb <= l.weights.len() {
                    wts.extend_from_slice(&l.weights[src..src + eb]);
                } else {
                    wts.extend(std::iter::repeat_n(0u8, eb));
                }
            }
        }
        l.weights = wts;
        l.inputs = w;
    }
}

/// Sets the bias of channel `c` of int8 layer `k` to `bound + delta`, where `bound` is the
/// largest bias validation accepts for that row: `i32::MAX - 128 · Σ|w|`, or
/// `i32::MAX - 32768 · Σ|w|` on the first layer of a model with an int16 input (version 7).
fn bias_at_bound(m: &mut OwnedModel, k: usize, c: usize, delta: i64, negative: bool) {
    let reach = match &m.input_quant {
        Some(q) if k == 0 => q.width.reach(),
        _ => 128,
    };
    let Some(l) = m.layers.get_mut(k) else { return };
    let inputs = l.inputs.max(1) as usize;
    let rows = l.bias.len() / 4;
    if rows == 0 {
        return;
    }
    let c = c % rows;
    let row = l.weights.get(c * inputs..(c + 1) * inputs).unwrap_or(&[]);
    let sum: i64 = row
        .iter()
        .map(|&w| i64::from((w as i8).unsigned_abs()))
        .sum();
    let b = (i64::from(i32::MAX) - reach * sum + delta).clamp(0, i64::from(i32::MAX));
    let b = if negative { -b } else { b } as i32;
    set_elem(&mut l.bias, c, b.to_le_bytes());
}

/// Applies one mutation chosen by `u`.
pub fn mutate_once(m: &mut OwnedModel, u: &mut Unstructured<'_>) -> Result<()> {
    let nl = m.layers.len().max(1);
    let op: u8 = u.int_in_range(0..=33)?;
    match op {
        0 => {
            let w = u.int_in_range(0..=40)?;
            reshape(m, None, w);
        }
        1 => {
            let k = u.choose_index(nl)?;
            let w = u.int_in_range(0..=40)?;
            reshape(m, Some(k), w);
        }
        2 => m.input_len = u.arbitrary()?,
        3 => {
            if let Some(l) = m.layers.get_mut(u.choose_index(nl)?) {
                if u.arbitrary()? {
                    l.inputs = u.arbitrary()?;
                } else {
                    l.outputs = u.int_in_range(0..=64)?;
                }
            }
        }
        4 => {
            m.precision = if m.precision == Precision::Int8 {
                Precision::F32
            } else {
                Precision::Int8
            }
        }
        5 => {
            m.scaler = match u.int_in_range(0..=2)? {
                0 => None,
                1 => Some((1.0f32.to_le_bytes().to_vec(), 0.5f32.to_le_bytes().to_vec())),
                _ => {
                    let n = m.input_len.min(64) as usize;
                    Some((vec![0; 4 * n], 1.0f32.to_le_bytes().repeat(n)))
                }
            }
        }
        6 => {
            if let Some((o, s)) = &mut m.scaler {
                let i = u.arbitrary()?;
                let v = pick_f32(u)?.to_le_bytes();
                if u.arbitrary()? {
                    set_elem(o, i, v)
                } else {
                    set_elem(s, i, v)
                }
            }
        }
        7 => {
            if let Some((o, _)) = &mut m.scaler {
                let n = u.int_in_range(0..=9)?;
                o.resize(n, 0);
            }
        }
        8 => {
            m.input_quant = if m.input_quant.is_some() && u.arbitrary()? {
                None
            } else {
                Some(OwnedInput {
                    scale: 0.02,
                    zero_point: 0,
                    int_mult: (1i32 << 20).to_le_bytes().to_vec(),
                    int_add: 0i64.to_le_bytes().to_vec(),
                    int_shift: vec![20],
                    width: InputWidth::I8,
                })
            }
        }
        9 => {
            if let Some(q) = &mut m.input_quant {
                match u.int_in_range(0..=5)? {
                    0 => q.scale = pick_f32(u)?,
                    1 => q.zero_point = u.arbitrary()?,
                    2 => set_elem(&mut q.int_mult, u.arbitrary()?, pick_i32(u)?.to_le_bytes()),
                    3 => set_elem(&mut q.int_add, u.arbitrary()?, pick_i64(u)?.to_le_bytes()),
                    4 => {
                        let s = u.int_in_range(0..=70)?;
                        let n = q.int_shift.len().max(1);
                        let i = u.choose_index(n)?;
                        if let Some(x) = q.int_shift.get_mut(i) {
                            *x = s;
                        }
                    }
                    _ => {
                        let n = u.int_in_range(0..=9)?;
                        q.int_shift.resize(n, 8);
                        if u.arbitrary()? {
                            q.int_mult.resize(4 * n, 1);
                            q.int_add.resize(8 * n, 0);
                        }
                    }
                }
            }
        }
        10..=21 => {
            let k = u.choose_index(nl)?;
            let Some(l) = m.layers.get_mut(k) else {
                return Ok(());
            };
            mutate_layer(l, op - 10, u, m.precision)?;
            if op == 21 {
                let c = u.arbitrary()?;
                let delta = u.int_in_range(-3..=3)?;
                let neg = u.arbitrary()?;
                bias_at_bound(m, k, c, delta, neg);
            }
        }
        22 if m.layers.len() > 1 => {
            let k = u.choose_index(m.layers.len())?;
            m.layers.remove(k);
        }
        23 => {
            if let Some(l) = m.layers.last().cloned() {
                // Append a square copy of the last layer's output width.
                let w = l.outputs;
                let eb = wbytes(m.precision);
                let mut add = OwnedLayer {
                    inputs: w,
                    outputs: w,
                    activation: Activation::Relu,
                    layout: WeightLayout::OutputMajor,
                    weights: vec![0; (w * w) as usize * eb],
                    bias: vec![0; 4 * w as usize],
                    quant: l.quant.as_ref().map(|_| default_quant(w as usize)),
                };
                if u.arbitrary()? {
                    add.weights.iter_mut().step_by(eb).for_each(|b| *b = 1);
                }
                m.layers.push(add);
            }
        }
        24 => {
            m.output = match u.int_in_range(0..=3)? {
                0 => OutputKind::Logits,
                1 => OutputKind::Softmax,
                2 => OutputKind::OneVsRest,
                _ => OutputKind::Sigmoid,
            }
        }
        25 => {
            let n = u.int_in_range(0..=12)?;
            m.labels = (0..n)
                .map(|i| format!("c{i}"))
                .collect::<Vec<_>>()
                .join("\n");
        }
        26 => m.labels = u.arbitrary::<String>()?,
        27 => {
            // Give every layer a quant block (or strip them) to match the precision.
            let int8 = m.precision == Precision::Int8;
            for l in &mut m.layers {
                if l.inputs > MAX_EDIT_WIDTH || l.outputs > MAX_EDIT_WIDTH {
                    continue;
                }
                l.quant = int8.then(|| default_quant(l.outputs as usize));
                let eb = wbytes(m.precision);
                l.weights.resize((l.inputs * l.outputs) as usize * eb, 0);
            }
            if int8 && m.input_quant.is_none() {
                m.input_quant = Some(OwnedInput {
                    scale: 0.02,
                    zero_point: -3,
                    int_mult: (1i32 << 20).to_le_bytes().to_vec(),
                    int_add: 0i64.to_le_bytes().to_vec(),
                    int_shift: vec![20],
                    width: InputWidth::I8,
                });
            } else if !int8 {
                m.input_quant = None;
            }
        }
        28 => {
            // Extreme weights: a whole layer of one value.
            let k = u.choose_index(nl)?;
            let v: u8 = *u.choose(&[0x80, 0x7f, 0x81, 0x00, 0xff])?;
            if let Some(l) = m.layers.get_mut(k) {
                if l.quant.is_some() {
                    l.weights.iter_mut().for_each(|b| *b = v);
                }
            }
        }
        29 => {
            // Flip a layer's weight layout (the bytes stay: mostly a length or range fault).
            if let Some(l) = m.layers.get_mut(u.choose_index(nl)?) {
                l.layout = match l.layout {
                    WeightLayout::OutputMajor => WeightLayout::Blocked4x4,
                    _ => WeightLayout::OutputMajor,
                };
            }
        }
        // Version 5: leave an optional section out, whole or (one layer's scales) partly.
        30 => m.drop_integer_input(),
        31 => {
            if u.arbitrary()? {
                m.drop_weight_scales();
            } else if let Some(q) = m
                .layers
                .get_mut(u.choose_index(nl)?)
                .and_then(|l| l.quant.as_mut())
            {
                q.weight_scale.clear();
            }
        }
        // Version 7: flip the input tensor between int8 and int16. Mostly towards a table the
        // reader can accept (an int16 input takes zero point 0; its first layer's weights must
        // be int8, and its biases within the int16 bound, which `bias_at_bound` aims at), and
        // sometimes not (a zero point left as it was; int4 weights stay int4).
        32 => {
            if let Some(q) = &mut m.input_quant {
                q.width = match q.width {
                    InputWidth::I8 => InputWidth::I16,
                    InputWidth::I16 => InputWidth::I8,
                };
                if q.width == InputWidth::I16 && u.ratio(3, 4)? {
                    q.zero_point = 0;
                }
            }
            if u.ratio(1, 2)? {
                if let Some(l) = m.layers.first_mut() {
                    // Smaller first-layer weights, so an int16 input's bound holds more often.
                    if l.quant.is_some() && l.layout != WeightLayout::Nibble4x4 {
                        l.weights
                            .iter_mut()
                            .for_each(|b| *b = (*b as i8 / 16) as u8);
                    }
                }
            }
        }
        // An int16 input's first layer at the extremes: every weight one value, every input
        // saturated (the oracle's extreme inputs), a bias at the bound.
        33 => {
            if let Some(l) = m.layers.first_mut() {
                let v: u8 = *u.choose(&[0x80, 0x7f, 0x01, 0xff])?;
                if l.quant.is_some() && l.layout == WeightLayout::OutputMajor {
                    l.weights.iter_mut().for_each(|b| *b = v);
                }
            }
            let c = u.arbitrary()?;
            let neg = u.arbitrary()?;
            bias_at_bound(m, 0, c, u.int_in_range(-2..=2)?, neg);
        }
        _ => {}
    }
    Ok(())
}

fn mutate_layer(l: &mut OwnedLayer, op: u8, u: &mut Unstructured<'_>, p: Precision) -> Result<()> {
    match op {
        0 => {
            // Linear → Relu → a pointwise record (any kind byte; an int8 layer's table or an
            // f32 layer's parameters of fuzzed length) → Linear.
            l.activation = match l.activation {
                Activation::Linear => Activation::Relu,
                Activation::Relu => {
                    let kind = u.int_in_range(0..=12)?;
                    let len = match p {
                        Precision::Int8 => {
                            if u.ratio(7, 8)? {
                                256
                            } else {
                                u.int_in_range(0..=300)?
                            }
                        }
                        Precision::F32 => 4 * u.int_in_range(0..=2)?,
                    };
                    let mut data = vec![0u8; len];
                    u.fill_buffer(&mut data)?;
                    Activation::Pointwise {
                        kind,
                        input_zero_point: if p == Precision::Int8 {
                            u.arbitrary()?
                        } else {
                            0
                        },
                        data,
                    }
                }
                Activation::Pointwise { .. } => Activation::Linear,
            }
        }
        1 => {
            let i: usize = u.arbitrary()?;
            if p == Precision::F32 {
                set_elem(&mut l.weights, i, pick_f32(u)?.to_le_bytes());
            } else {
                set_elem(&mut l.weights, i, [u.arbitrary::<u8>()?]);
            }
        }
        2 => {
            let i: usize = u.arbitrary()?;
            if p == Precision::F32 {
                set_elem(&mut l.bias, i, pick_f32(u)?.to_le_bytes());
            } else {
                set_elem(&mut l.bias, i, pick_i32(u)?.to_le_bytes());
            }
        }
        3 => {
            let n = l.weights.len();
            let d: i8 = u.int_in_range(-5..=5)?;
            l.weights
                .resize((n as i64 + i64::from(d)).max(0) as usize, 0);
        }
        4 => {
            let n = l.bias.len();
            let d: i8 = u.int_in_range(-5..=5)?;
            l.bias.resize((n as i64 + i64::from(d)).max(0) as usize, 0);
        }
        5 => {
            if let Some(q) = &mut l.quant {
                set_elem(
                    &mut q.multiplier,
                    u.arbitrary()?,
                    pick_i32(u)?.to_le_bytes(),
                );
            }
        }
        6 => {
            if let Some(q) = &mut l.quant {
                let s: i8 = u.int_in_range(-40..=40)?;
                set_elem(&mut q.shift, u.arbitrary()?, [s as u8]);
            }
        }
        7 => {
            if let Some(q) = &mut l.quant {
                set_elem(
                    &mut q.weight_scale,
                    u.arbitrary()?,
                    pick_f32(u)?.to_le_bytes(),
                );
            }
        }
        8 => {
            if let Some(q) = &mut l.quant {
                q.output_scale = pick_f32(u)?;
            }
        }
        9 => {
            if let Some(q) = &mut l.quant {
                q.output_zero_point = u.arbitrary()?;
            }
        }
        10 => {
            if let Some(q) = &mut l.quant {
                match u.int_in_range(0..=2)? {
                    0 => q.shift.pop().map(drop).unwrap_or(()),
                    1 => q.multiplier.push(0),
                    _ => q
                        .weight_scale
                        .truncate(q.weight_scale.len().saturating_sub(4)),
                }
            } else {
                l.quant = Some(default_quant(l.outputs as usize));
            }
        }
        _ => {}
    }
    Ok(())
}
