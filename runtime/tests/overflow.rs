//! The int32 accumulator bound, by property tests with adversarial weights and inputs.
//!
//! Validation accepts an int8 layer only when `|bias| + 128 · Σ|w| ≤ 2^31 - 1` for every row
//! (`validate.rs`; the converter proves the same bound before it writes a blob). Since every int8
//! input `x` has `|x| ≤ 128`, every partial sum of `bias + Σ w·x` then fits in i32. These tests
//! run in the test profile (debug assertions on), so an overflowing `+=` in the kernel would
//! panic. They check that (1) every accepted layer runs every adversarial input without
//! overflow and gives exactly `requantise_reference(bias + Σ w·x)` computed here in i64, and (2) the bound
//! is tight: a bias one past it is rejected, and at the bound an input exists that drives the
//! accumulator to exactly `i32::MAX` (or `-i32::MAX`).
mod common;

use common::{int8_layer, int8_model, quant};
use kinglet_runtime::unstable::requant::requantise_reference;
use kinglet_runtime::{FormatError, Input, Model};
use proptest::prelude::*;

/// Weight rows of the kinds that stress the bound most.
fn weights(n: usize) -> impl Strategy<Value = Vec<i8>> {
    prop_oneof![
        Just(vec![-128i8; n]),
        Just(vec![127i8; n]),
        Just(
            (0..n)
                .map(|i| if i % 2 == 0 { -128 } else { 127 })
                .collect()
        ),
        proptest::collection::vec(any::<i8>(), n),
        proptest::collection::vec(prop_oneof![Just(-128i8), Just(127i8), Just(0i8)], n),
    ]
}

/// `|bias|` limit validation allows for `row`.
fn limit(row: &[i8]) -> i64 {
    i64::from(i32::MAX)
        - 128
            * row
                .iter()
                .map(|&w| i64::from(w.unsigned_abs()))
                .sum::<i64>()
}

/// The inputs that maximise and minimise `Σ w·x` for `row`, plus the uniform extremes.
fn adversarial(row: &[i8]) -> Vec<Vec<i16>> {
    let up: Vec<i16> = row
        .iter()
        .map(|&w| if w < 0 { -128 } else { 127 })
        .collect();
    let down: Vec<i16> = row
        .iter()
        .map(|&w| if w < 0 { 127 } else { -128 })
        .collect();
    vec![
        up,
        down,
        vec![-128; row.len()],
        vec![127; row.len()],
        // Far out of range: the integer input path saturates these to -128 / 127.
        vec![i16::MIN; row.len()],
        vec![i16::MAX; row.len()],
    ]
}

/// Runs `x` and returns the int8 outputs of the single layer.
fn layer_output(m: &Model<'_>, x: &[i16]) -> Vec<i8> {
    let mut scratch = vec![0u8; m.scratch_bytes()];
    let mut scores = vec![0f32; m.output_len()];
    let mut out = Vec::new();
    m.infer_traced(Input::I16(x), &mut scratch, &mut scores, &mut |s| {
        if s.index == 1 {
            out = (0..s.values.len())
                .filter_map(|i| s.values.int8(i))
                .collect();
        }
    })
    .expect("inference of an accepted model succeeds");
    out
}

/// `bias + Σ w·x` in i64, with `x` saturated to int8 as the input path does (identity tables).
fn reference_acc(row: &[i8], bias: i32, x: &[i16]) -> i64 {
    row.iter()
        .zip(x)
        .map(|(&w, &v)| i64::from(w) * i64::from(v.clamp(-128, 127)))
        .sum::<i64>()
        + i64::from(bias)
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 256, ..ProptestConfig::default() })]

    #[test]
    fn accepted_layers_never_overflow_and_are_exact(
        (rows, n) in (1usize..=48).prop_flat_map(|n| (proptest::collection::vec(weights(n), 1..=4), Just(n))),
        bias_frac in proptest::collection::vec(-1.0f64..=1.0, 4),
        at_bound in proptest::collection::vec(any::<bool>(), 4),
        shift in -31i8..=31,
        zero_point in any::<i8>(),
    ) {
        // Each row's bias: at the bound (either sign) or anywhere inside it.
        let bias: Vec<i32> = rows
            .iter()
            .enumerate()
            .map(|(c, row)| {
                let l = limit(row);
                let f = bias_frac[c];
                let b = if at_bound[c] { l * f.signum() as i64 } else { (l as f64 * f) as i64 };
                b as i32
            })
            .collect();
        let w: Vec<i8> = rows.concat();
        let mut layer = int8_layer(n as u32, &w, &bias, shift);
        quant(&mut layer).output_zero_point = zero_point;
        let blob = int8_model(n as u32, vec![layer]).raw_blob();
        let m = Model::parse(&blob).expect("a layer within the bound is accepted");
        let mut inputs: Vec<Vec<i16>> = rows.iter().flat_map(|r| adversarial(r)).collect();
        inputs.push((0..n as i16).map(|i| i * 37 - 500).collect());
        for x in &inputs {
            let got = layer_output(&m, x);
            for (c, row) in rows.iter().enumerate() {
                let acc = reference_acc(row, bias[c], x);
                prop_assert!(acc.abs() <= i64::from(i32::MAX), "bound violated: {acc}");
                let want = requantise_reference(acc as i32, 1 << 30, shift, zero_point, i8::MIN, i8::MAX);
                prop_assert_eq!(got[c], want, "channel {} input {:?}", c, x);
            }
        }
    }

    #[test]
    fn one_past_the_bound_is_rejected(
        row in (1usize..=64).prop_flat_map(weights),
        negative in any::<bool>(),
        extra in 1i64..1000,
    ) {
        let n = row.len() as u32;
        let l = limit(&row);
        prop_assume!(l + extra <= i64::from(i32::MAX));
        let b = if negative { -(l + extra) } else { l + extra };
        // Two channels with the same weights `row`.
        let layer = int8_layer(n, &[row.as_slice(), &row].concat(), &[0, b as i32], 0);
        let blob = int8_model(n, vec![layer]).raw_blob();
        prop_assert_eq!(
            Model::parse(&blob).map(|_| ()),
            Err(FormatError::AccumulatorOverflow { layer: 0, channel: 1 })
        );
    }
}

#[test]
fn the_bound_is_reached_exactly() {
    // All weights -128 and every input -128: each product is +16384 = 128·|w|, so a bias at the
    // bound puts the accumulator exactly at i32::MAX.
    // 1000 inputs take minutes under Miri (scripts/miri.sh); the small widths cover the logic.
    let widths: &[usize] = if cfg!(miri) {
        &[1, 7, 64]
    } else {
        &[1, 7, 64, 1000]
    };
    for &n in widths {
        let row = vec![-128i8; n];
        let b = limit(&row) as i32;
        let x = vec![-128i16; n];
        assert_eq!(reference_acc(&row, b, &x), i64::from(i32::MAX));
        let blob = int8_model(n as u32, vec![int8_layer(n as u32, &row, &[b], 0)]).raw_blob();
        let m = Model::parse(&blob).expect("bias at the bound accepted");
        // Debug build: no overflow panic, and the saturated output is the largest int8.
        assert_eq!(layer_output(&m, &x), vec![127]);
        // One more and validation refuses it.
        let over = int8_model(n as u32, vec![int8_layer(n as u32, &row, &[b + 1], 0)]).raw_blob();
        assert_eq!(
            Model::parse(&over).map(|_| ()),
            Err(FormatError::AccumulatorOverflow {
                layer: 0,
                channel: 0
            })
        );
        // Negative side: bias -limit with weights -128 and inputs of 127 reaches
        // -limit - 127·128·n = -(i32::MAX) + 128·n, the most negative sum this row allows.
        let neg = int8_model(n as u32, vec![int8_layer(n as u32, &row, &[-b], 0)]).raw_blob();
        let m = Model::parse(&neg).expect("negative bias at the bound accepted");
        let acc = reference_acc(&row, -b, &vec![127; n]);
        assert_eq!(acc, -i64::from(i32::MAX) + 128 * n as i64);
        assert_eq!(layer_output(&m, &vec![127; n]), vec![-128]);
    }
}

#[test]
#[cfg_attr(miri, ignore = "a 16384-input layer takes minutes under Miri")]
fn widest_layer_at_the_bound() {
    // 16384 inputs (the widest the format allows) of weight 127: Σ|w|·128 = 266_338_304, well
    // inside i32, so any bias up to the limit is accepted and runs without overflow.
    let n = kinglet_runtime::unstable::wire::format::MAX_WIDTH as usize;
    let row = vec![127i8; n];
    let b = limit(&row) as i32;
    let blob = int8_model(n as u32, vec![int8_layer(n as u32, &row, &[b], 0)]).raw_blob();
    let m = Model::parse(&blob).expect("accepted");
    let x = vec![i16::MAX; n];
    assert_eq!(
        reference_acc(&row, b, &x),
        i64::from(b) + 127 * 127 * n as i64
    );
    assert_eq!(layer_output(&m, &x), vec![127]);
}
