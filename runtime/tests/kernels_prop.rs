//! Property tests: every kernel and layout gives the bytes of the portable output-major kernel.
//!
//! On the host this runs the portable blocked kernels, the Cortex-M0 kernel's Rust, the
//! kernel [`dense_i8_blocked_auto`] dispatches to, and the kernels' requantisation; the `asm!`
//! kernels themselves run in the on-target self-check of `kernel-bench/`.
use kinglet_builder::le;
use kinglet_runtime::unstable::dense::int4;
#[cfg(feature = "int16-input")]
use kinglet_runtime::unstable::dense::wide;
use kinglet_runtime::unstable::dense::{self, m0, portable, DenseF32, DenseI8};
use kinglet_runtime::unstable::requant;
use kinglet_runtime::unstable::requant::requantise_reference;
use kinglet_runtime::unstable::wire::{layout, nibble};
use proptest::prelude::*;

/// Weights or inputs: random, or all -128, or all 127.
fn int8s(len: usize) -> impl Strategy<Value = Vec<i8>> {
    prop_oneof![
        6 => proptest::collection::vec(any::<i8>(), len),
        1 => Just(vec![i8::MIN; len]),
        1 => Just(vec![i8::MAX; len]),
    ]
}

#[derive(Debug, Clone)]
struct Int8Case {
    n: usize,
    m: usize,
    w: Vec<i8>,
    x: Vec<i8>,
    bias_seed: Vec<i64>,
    mult: Vec<i32>,
    shift: Vec<i8>,
    zp: i8,
    relu: bool,
    pad: usize,
}

fn int8_case() -> impl Strategy<Value = Int8Case> {
    (1usize..=70, 1usize..=40)
        .prop_flat_map(|(n, m)| {
            (
                Just((n, m)),
                int8s(n * m),
                int8s(n),
                proptest::collection::vec(any::<i64>(), m),
                proptest::collection::vec((1i32 << 30)..=i32::MAX, m),
                proptest::collection::vec(prop_oneof![3 => -1i8..=12, 1 => -31i8..=31], m),
                (any::<i8>(), any::<bool>(), 0usize..=3),
            )
        })
        .prop_map(
            |((n, m), w, x, bias_seed, mult, shift, (zp, relu, pad))| Int8Case {
                n,
                m,
                w,
                x,
                bias_seed,
                mult,
                shift,
                zp,
                relu,
                pad,
            },
        )
}

/// int4 weights: random in [-8, 7], or all -8, or all 7.
fn int4s(len: usize) -> impl Strategy<Value = Vec<i8>> {
    prop_oneof![
        6 => proptest::collection::vec(-8i8..=7, len),
        1 => Just(vec![-8; len]),
        1 => Just(vec![7; len]),
    ]
}

fn int4_case() -> impl Strategy<Value = Int8Case> {
    int8_case().prop_flat_map(|c| {
        let len = c.n * c.m;
        (Just(c), int4s(len)).prop_map(|(c, w)| Int8Case { w, ..c })
    })
}

/// The naive int4 layer: `bias + Σ w x` in i64 from the output-major weights, then the
/// reference requantisation, row by row (no layout, no nibbles, no sums of `FORMAT.md` §3.5).
fn naive_i4(c: &Int8Case, bias: &[i32]) -> Vec<u8> {
    (0..c.m)
        .map(|o| {
            let row = &c.w[o * c.n..(o + 1) * c.n];
            let dot: i64 = row
                .iter()
                .zip(&c.x)
                .map(|(&w, &x)| i64::from(w) * i64::from(x))
                .sum();
            let acc = i32::try_from(i64::from(bias[o]) + dot).expect("the format's bound");
            let lo = if c.relu { c.zp } else { -128 };
            requantise_reference(acc, c.mult[o], c.shift[o], c.zp, lo, 127) as u8
        })
        .collect()
}

/// Biases the format accepts for the case's weights: `|bias| + 128·Σ|w| ≤ 2^31 - 1`.
fn biases(c: &Int8Case) -> Vec<i32> {
    (0..c.m)
        .map(|o| {
            let s: i64 = c.w[o * c.n..(o + 1) * c.n]
                .iter()
                .map(|&v| i64::from(v).abs())
                .sum();
            let room = i64::from(i32::MAX) - 128 * s;
            (c.bias_seed[o].rem_euclid(2 * room + 1) - room) as i32
        })
        .collect()
}

type Kernel = fn(&DenseI8<'_>, &[u8], &mut [u8]);

/// The int4 kernels this host runs: the portable one, the Rust shapes of the target kernels,
/// and the one `dense_i4_auto` dispatches to.
fn int4_kernels() -> [(&'static str, Kernel); 2] {
    [
        ("portable", int4::dense_i4_portable as Kernel),
        ("dispatched", dense::dense_i4_auto),
    ]
}

fn check_int4(c: &Int8Case) -> Result<(), TestCaseError> {
    let (n, m) = (c.n, c.m);
    let bias = biases(c);
    let want = naive_i4(c, &bias);
    let (bias, mult, shift, x) = (
        le::i32s(&bias),
        le::i32s(&c.mult),
        le::i8s(&c.shift),
        le::i8s(&c.x),
    );
    let mut field = vec![0u8; c.pad + nibble::bytes(n, m)];
    prop_assert!(nibble::pack(n, m, &c.w, &mut field[c.pad..]));
    let p = DenseI8 {
        inputs: n,
        weights: &field,
        bias: &bias,
        multiplier: &mult,
        shift: &shift,
        zero_point: c.zp,
        act_min: if c.relu { c.zp } else { -128 },
        act_max: 127,
        table: None,
    };
    for (name, kernel) in int4_kernels() {
        let mut got = vec![0x55u8; m];
        kernel(&p, &x, &mut got);
        prop_assert_eq!(&got, &want, "int4 {} kernel, {}x{}", name, m, n);
    }
    Ok(())
}

/// int16 inputs: random over the whole range, or all -32768, or all 32767.
#[cfg(feature = "int16-input")]
fn int16s(len: usize) -> impl Strategy<Value = Vec<i16>> {
    prop_oneof![
        6 => proptest::collection::vec(any::<i16>(), len),
        1 => Just(vec![i16::MIN; len]),
        1 => Just(vec![i16::MAX; len]),
    ]
}

/// A first layer of an int16-input model (format version 7): the int8 case's weights and
/// parameters, int16 inputs.
#[cfg(feature = "int16-input")]
fn int16_input_case() -> impl Strategy<Value = (Int8Case, Vec<i16>)> {
    int8_case().prop_flat_map(|c| {
        let n = c.n;
        (Just(c), int16s(n))
    })
}

/// The naive first layer of an int16-input model: `bias + Σ w x` in i64 from the
/// output-major weights, then the reference requantisation, row by row.
#[cfg(feature = "int16-input")]
fn naive_i16(c: &Int8Case, x: &[i16], bias: &[i32]) -> Vec<u8> {
    (0..c.m)
        .map(|o| {
            let row = &c.w[o * c.n..(o + 1) * c.n];
            let dot: i64 = row
                .iter()
                .zip(x)
                .map(|(&w, &x)| i64::from(w) * i64::from(x))
                .sum();
            let acc = i32::try_from(i64::from(bias[o]) + dot).expect("the format's bound");
            let lo = if c.relu { c.zp } else { -128 };
            requantise_reference(acc, c.mult[o], c.shift[o], c.zp, lo, 127) as u8
        })
        .collect()
}

/// Both int16-input kernels (output-major and `Blocked4x4` at the case's alignment) against
/// [`naive_i16`], with biases up to the format's bound for an int16 input,
/// `|bias| + 32768·Σ|w| ≤ 2^31 - 1` (`FORMAT.md` §5 rule 14).
#[cfg(feature = "int16-input")]
fn check_int16_input(c: &Int8Case, x: &[i16]) -> Result<(), TestCaseError> {
    let (n, m) = (c.n, c.m);
    let bias: Vec<i32> = (0..m)
        .map(|o| {
            let s: i64 = c.w[o * n..(o + 1) * n]
                .iter()
                .map(|&v| i64::from(v).abs())
                .sum();
            let room = i64::from(i32::MAX) - 32_768 * s;
            (c.bias_seed[o].rem_euclid(2 * room + 1) - room) as i32
        })
        .collect();
    let want = naive_i16(c, x, &bias);
    let (bias, mult, shift, om) = (
        le::i32s(&bias),
        le::i32s(&c.mult),
        le::i8s(&c.shift),
        le::i8s(&c.w),
    );
    let input: Vec<u8> = x.iter().flat_map(|v| v.to_le_bytes()).collect();
    let mut field = vec![0u8; c.pad + layout::elements(n, m)];
    prop_assert!(layout::block_i8(n, m, &c.w, &mut field[c.pad..]));
    let base = DenseI8 {
        inputs: n,
        weights: &om,
        bias: &bias,
        multiplier: &mult,
        shift: &shift,
        zero_point: c.zp,
        act_min: if c.relu { c.zp } else { -128 },
        act_max: 127,
        table: None,
    };
    let mut got = vec![0x55u8; m];
    wide::dense_i16(&base, &input, &mut got);
    prop_assert_eq!(&got, &want, "int16-input output-major, {}x{}", m, n);
    let blocked = DenseI8 {
        weights: &field,
        ..base
    };
    let mut got = vec![0x55u8; m];
    wide::dense_i16_blocked(&blocked, &input, &mut got);
    prop_assert_eq!(&got, &want, "int16-input blocked, {}x{}", m, n);
    Ok(())
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(400))]

    #[test]
    fn int4_kernels_agree_with_the_naive_reference(c in int4_case()) {
        check_int4(&c)?;
    }

    #[test]
    #[cfg(feature = "int16-input")]
    fn int16_input_kernels_agree_with_the_naive_reference((c, x) in int16_input_case()) {
        check_int16_input(&c, &x)?;
    }

    #[test]
    fn int8_kernels_agree_with_the_portable_output_major_one(c in int8_case()) {
        let (n, m) = (c.n, c.m);
        // Any bias the format accepts: |bias| + 128·Σ|w| ≤ 2^31 - 1.
        let bias: Vec<u8> = (0..m)
            .flat_map(|o| {
                let s: i64 = c.w[o * n..(o + 1) * n].iter().map(|&v| i64::from(v).abs()).sum();
                let room = i64::from(i32::MAX) - 128 * s;
                ((c.bias_seed[o].rem_euclid(2 * room + 1) - room) as i32).to_le_bytes()
            })
            .collect();
        let (mult, shift) = (le::i32s(&c.mult), le::i8s(&c.shift));
        let (om, x) = (le::i8s(&c.w), le::i8s(&c.x));
        let mut field = vec![0u8; c.pad + layout::elements(n, m)];
        prop_assert!(layout::block_i8(n, m, &c.w, &mut field[c.pad..]));
        let base = DenseI8 {
            inputs: n,
            weights: &om,
            bias: &bias,
            multiplier: &mult,
            shift: &shift,
            zero_point: c.zp,
            act_min: if c.relu { c.zp } else { -128 },
            act_max: 127,
            table: None,
        };
        let blocked = DenseI8 { weights: &field, ..base };
        let mut want = vec![0u8; m];
        portable::dense_i8(&base, &x, &mut want);
        for (name, kernel) in [
            ("portable blocked", portable::dense_i8_blocked_portable as fn(&DenseI8<'_>, &[u8], &mut [u8])),
            ("m0", m0::dense_i8_blocked_m0_rust),
            ("dispatched", dense::dense_i8_blocked_auto),
        ] {
            let mut got = vec![0x55u8; m];
            kernel(&blocked, &x, &mut got);
            prop_assert_eq!(&got, &want, "{} kernel, {}x{}", name, m, n);
        }
        // With a pointwise table (a permutation seeded by the case): every kernel stores
        // `table[q + 128]` of the value it stored without one.
        let table: [u8; 256] = core::array::from_fn(|i| (i as u8).wrapping_mul(37).wrapping_add(c.zp as u8));
        let looked: Vec<u8> = want.iter().map(|&q| table[usize::from(q ^ 0x80)]).collect();
        let full = DenseI8 { act_min: -128, table: Some(&table), ..base };
        let mut got = vec![0x55u8; m];
        portable::dense_i8(&full, &x, &mut got);
        if !c.relu {
            prop_assert_eq!(&got, &looked, "output-major with a table, {}x{}", m, n);
        }
        let blocked_t = DenseI8 { weights: &field, ..full };
        for (name, kernel) in [
            ("portable blocked", portable::dense_i8_blocked_portable as fn(&DenseI8<'_>, &[u8], &mut [u8])),
            ("m0", m0::dense_i8_blocked_m0_rust),
            ("dispatched", dense::dense_i8_blocked_auto),
        ] {
            let mut with = vec![0x55u8; m];
            kernel(&blocked_t, &x, &mut with);
            prop_assert_eq!(&with, &got, "{} kernel with a table, {}x{}", name, m, n);
        }
    }

    #[test]
    fn f32_kernels_agree_bit_for_bit(
        (n, m, w, x, b, relu, pad) in (1usize..=70, 1usize..=40).prop_flat_map(|(n, m)| (
            Just(n), Just(m),
            proptest::collection::vec(-2.0f32..2.0, n * m),
            proptest::collection::vec(-4.0f32..4.0, n),
            proptest::collection::vec(-1.0f32..1.0, m),
            any::<bool>(), 0usize..=3,
        ))
    ) {
        let (om, xb, bb) = (le::f32s(&w), le::f32s(&x), le::f32s(&b));
        let mut field = vec![0u8; pad + 4 * layout::elements(n, m)];
        prop_assert!(layout::block_f32(n, m, &w, &mut field[pad..]));
        let blocked = DenseF32 { inputs: n, weights: &field, bias: &bb, relu };
        let mut want = vec![0u8; 4 * m];
        portable::dense_f32(&DenseF32 { weights: &om, ..blocked }, &xb, &mut want);
        let mut got = vec![0u8; 4 * m];
        portable::dense_f32_blocked_portable(&blocked, &xb, &mut got);
        prop_assert_eq!(&got, &want);
        let mut got = vec![0u8; 4 * m];
        dense::dense_f32_blocked_auto(&blocked, &xb, &mut got);
        prop_assert_eq!(&got, &want);
    }

    #[test]
    fn kernel_requantisation_equals_the_reference(
        acc in prop_oneof![any::<i32>(), Just(i32::MIN), Just(i32::MAX), -1000i32..1000],
        mult in prop_oneof![(1i32 << 30)..=i32::MAX, Just(1 << 30), Just(i32::MAX)],
        shift in -31i8..=31,
        zp in any::<i8>(),
        bounds in (any::<i8>(), any::<i8>()),
    ) {
        let (lo, hi) = (bounds.0.min(bounds.1), bounds.0.max(bounds.1));
        prop_assert_eq!(
            requant::requantise_validated(acc, mult, shift, zp, lo, hi),
            requantise_reference(acc, mult, shift, zp, lo, hi)
        );
    }
}

#[test]
fn one_by_one_and_exact_ties() {
    // 1×1: w = 3, x = 5, bias 1 → acc 16; M = 2^30·2^-31·2^-3 = 1/16 → 1.
    let p = DenseI8 {
        inputs: 1,
        weights: &[3],
        bias: &1i32.to_le_bytes(),
        multiplier: &(1i32 << 30).to_le_bytes(),
        shift: &[3],
        zero_point: 0,
        act_min: -128,
        act_max: 127,
        table: None,
    };
    let mut field = vec![0u8; 16];
    assert!(layout::block_i8(1, 1, &[3], &mut field));
    let blocked = DenseI8 {
        weights: &field,
        ..p
    };
    let mut out = [0u8; 1];
    portable::dense_i8(&p, &[5], &mut out);
    assert_eq!(out[0] as i8, 1);
    for kernel in [
        portable::dense_i8_blocked_portable,
        m0::dense_i8_blocked_m0_rust,
        dense::dense_i8_blocked_auto,
    ] {
        let mut out = [0u8; 1];
        kernel(&blocked, &[5], &mut out);
        assert_eq!(out[0] as i8, 1);
    }
    // Ties of both roundings, against the reference (gemmlowp semantics, requant.rs).
    for acc in [-6, -5, -3, -2, -1, 1, 2, 3, 5, 6] {
        for shift in [-2i8, 0, 1, 2] {
            assert_eq!(
                requant::requantise_validated(acc, 1 << 30, shift, 0, -128, 127),
                requantise_reference(acc, 1 << 30, shift, 0, -128, 127),
                "acc {acc}, shift {shift}"
            );
        }
    }
}

/// The widest layer the format allows, at the extremes of the sums of `FORMAT.md` §3.5 (every
/// byte `0x00` or `0xFF`, every input −128 or 127): no sum wraps, the kernels still agree.
#[test]
#[cfg_attr(miri, ignore = "a 16384-input layer takes minutes under Miri")]
fn int4_widest_layer_at_the_extremes() {
    let n = 16_384;
    for (w, x) in [(-8i8, -128i8), (7, -128), (-8, 127), (7, 127)] {
        let c = Int8Case {
            n,
            m: 3,
            w: vec![w; 3 * n],
            x: vec![x; n],
            bias_seed: vec![0; 3],
            mult: vec![1 << 30; 3],
            shift: vec![12; 3],
            zp: 0,
            relu: false,
            pad: 1,
        };
        check_int4(&c).expect("agree");
    }
}

/// The int16-input kernels on a wide layer at the extremes (every weight −128 or 127, every
/// input −32768 or 32767; 512 inputs keep `32768·Σ|w|` within the format's bound): the
/// blocked kernel's excess-128 partial sums leave i32 on the way and wrap back, the result
/// still equals the naive sum.
#[test]
#[cfg(feature = "int16-input")]
fn int16_input_wide_layer_at_the_extremes() {
    let n = 511;
    for (w, x) in [
        (-128i8, i16::MIN),
        (127, i16::MIN),
        (-128, i16::MAX),
        (127, i16::MAX),
    ] {
        let c = Int8Case {
            n,
            m: 5,
            w: vec![w; 5 * n],
            x: vec![],
            bias_seed: vec![0, 1, -1, i64::MAX, i64::MIN],
            mult: vec![1 << 30; 5],
            shift: vec![24; 5],
            zp: 0,
            relu: false,
            pad: 2,
        };
        check_int16_input(&c, &vec![x; n]).expect("agree");
    }
}
