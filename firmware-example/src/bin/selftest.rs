//! On-target unit tests of the runtime's kernels, run under QEMU on Cortex-M0 and Cortex-M4F.
//!
//! The cases come from the Python reference fixtures in `tests/fixtures/` (turned into tables
//! by `build.rs`): requantisation after Jacob et al., 2018 / gemmlowp (`requant_ref.py`),
//! ONNX `QuantizeLinear` through `onnx.reference.ReferenceEvaluator`
//! (`quantize_linear_ref.py`), int8 dense layers and float64 softmax (`dense_ref.py`). Hand-
//! worked cases cover the f32 dense kernel, sigmoid, argmax and the gemmlowp saturation edges.
//! Prints one line per failing case and ends with `selftest: N passed, M failed`; exits with
//! failure if any case failed.
#![no_std]
#![no_main]

use core::fmt::Write;
use cortex_m_rt::entry;
use kinglet_firmware_example::{board, console};
use kinglet_runtime::unstable::dense::{dense_f32, dense_i8, DenseF32, DenseI8};
use kinglet_runtime::unstable::output::{argmax, sigmoid, softmax};
use kinglet_runtime::unstable::requant::{
    requantise_reference, rounding_divide_by_pot, saturating_rounding_doubling_high_mul,
};
use kinglet_runtime::unstable::scale::quantize_linear;

/// An int8 dense reference case (`tests/fixtures/dense_int8_cases.json`).
struct DenseCase {
    inputs: usize,
    outputs: usize,
    x: &'static [u8],
    weights: &'static [u8],
    bias: &'static [u8],
    multiplier: &'static [u8],
    shift: &'static [u8],
    zero_point: i8,
    relu: bool,
    expected: &'static [i8],
}

mod cases {
    use super::DenseCase;
    include!(concat!(env!("OUT_DIR"), "/selftest_cases.rs"));
}

/// Counts results and prints failures.
struct Tally {
    passed: usize,
    failed: usize,
}

impl Tally {
    fn check(&mut self, ok: bool, what: core::fmt::Arguments<'_>) {
        if ok {
            self.passed += 1;
        } else {
            self.failed += 1;
            let mut l = console::LineBuf::new();
            let _ = l.write_fmt(what);
            console::line(&l);
        }
    }
}

#[entry]
fn main() -> ! {
    let mut t = Tally {
        passed: 0,
        failed: 0,
    };
    let mut l = console::LineBuf::new();
    let _ = write!(l, "selftest on {}", board::BOARD);
    console::line(&l);
    requant_reference(&mut t);
    requant_edges(&mut t);
    quantize_linear_reference(&mut t);
    dense_int8_reference(&mut t);
    dense_f32_cases(&mut t);
    softmax_reference(&mut t);
    output_cases(&mut t);
    corrupted_blob_is_rejected(&mut t);
    let mut l = console::LineBuf::new();
    let _ = write!(l, "selftest: {} passed, {} failed", t.passed, t.failed);
    console::line(&l);
    console::exit(t.failed == 0 && t.passed > 0)
}

fn requant_reference(t: &mut Tally) {
    for (i, &(acc, m, s, zp, lo, hi, want)) in cases::REQUANT.iter().enumerate() {
        let got = requantise_reference(acc, m, s, zp, lo, hi);
        t.check(
            got == want,
            format_args!("FAIL requantise_reference case {i}: got {got}, want {want}"),
        );
    }
}

/// gemmlowp's saturation and rounding edges (gemmlowp `fixedpoint.h`,
/// `SaturatingRoundingDoublingHighMul` and `RoundingDivideByPOT`).
fn requant_edges(t: &mut Tally) {
    let m = saturating_rounding_doubling_high_mul(i32::MIN, i32::MIN);
    t.check(m == i32::MAX, format_args!("FAIL high_mul(MIN, MIN) = {m}"));
    let m = saturating_rounding_doubling_high_mul(i32::MAX, i32::MAX);
    t.check(
        m == i32::MAX - 1,
        format_args!("FAIL high_mul(MAX, MAX) = {m}"),
    );
    for (x, e, want) in [
        (5, 1, 3),
        (-5, 1, -3),
        (6, 2, 2),
        (-6, 2, -2),
        (i32::MIN, 31, -1),
    ] {
        let got = rounding_divide_by_pot(x, e);
        t.check(
            got == want,
            format_args!("FAIL divide_by_pot({x}, {e}) = {got}"),
        );
    }
    // Negative shifts saturate the left shift to i32 before the multiply.
    let half = 1 << 30;
    for (acc, want) in [(i32::MAX, 127), (i32::MIN, -128), (7, 127)] {
        let got = requantise_reference(acc, half, -31, 0, -128, 127);
        t.check(
            got == want,
            format_args!("FAIL requantise_reference({acc}, shift -31) = {got}"),
        );
    }
}

fn quantize_linear_reference(t: &mut Tally) {
    for (i, &(x, s, zp, want)) in cases::QUANTIZE_LINEAR.iter().enumerate() {
        let got = quantize_linear(f32::from_bits(x), f32::from_bits(s), zp);
        t.check(
            got == want,
            format_args!("FAIL QuantizeLinear case {i}: got {got}, want {want}"),
        );
    }
}

fn dense_int8_reference(t: &mut Tally) {
    let mut out = [0u8; 128];
    for (i, c) in cases::DENSE.iter().enumerate() {
        let p = DenseI8 {
            inputs: c.inputs,
            weights: c.weights,
            bias: c.bias,
            multiplier: c.multiplier,
            shift: c.shift,
            zero_point: c.zero_point,
            act_min: if c.relu { c.zero_point } else { i8::MIN },
            act_max: i8::MAX,
            table: None,
        };
        let Some(dst) = out.get_mut(..c.outputs) else {
            t.check(
                false,
                format_args!("FAIL dense case {i}: {} outputs", c.outputs),
            );
            continue;
        };
        dense_i8(&p, c.x, dst);
        let same = dst.iter().zip(c.expected).all(|(&g, &w)| g as i8 == w)
            && c.expected.len() == c.outputs;
        t.check(
            same,
            format_args!("FAIL dense int8 case {i} ({}x{})", c.inputs, c.outputs),
        );
    }
}

fn f32_bytes<const N: usize, const B: usize>(v: [f32; N]) -> [u8; B] {
    let mut b = [0u8; B];
    for (chunk, x) in b.chunks_exact_mut(4).zip(v) {
        chunk.copy_from_slice(&x.to_le_bytes());
    }
    b
}

fn f32_at(b: &[u8], i: usize) -> f32 {
    let mut w = [0u8; 4];
    if let Some(s) = b.get(i * 4..i * 4 + 4) {
        w.copy_from_slice(s);
    }
    f32::from_le_bytes(w)
}

fn dense_f32_cases(t: &mut Tally) {
    // Hand-worked: [[1, 2], [-1, 0.5]] · [3, 4] + [0.5, -10] = [11.5, -11].
    let w: [u8; 16] = f32_bytes([1.0, 2.0, -1.0, 0.5]);
    let b: [u8; 8] = f32_bytes([0.5, -10.0]);
    let x: [u8; 8] = f32_bytes([3.0, 4.0]);
    let mut out = [0u8; 8];
    let linear = DenseF32 {
        inputs: 2,
        weights: &w,
        bias: &b,
        relu: false,
    };
    dense_f32(&linear, &x, &mut out);
    let y = (f32_at(&out, 0), f32_at(&out, 1));
    t.check(
        y == (11.5, -11.0),
        format_args!("FAIL dense f32 linear: {y:?}"),
    );
    dense_f32(
        &DenseF32 {
            relu: true,
            ..linear
        },
        &x,
        &mut out,
    );
    let y = (f32_at(&out, 0), f32_at(&out, 1));
    t.check(y == (11.5, 0.0), format_args!("FAIL dense f32 relu: {y:?}"));

    // 32 inputs × 8 outputs of small integers: every partial sum is an integer below 2^24, so
    // f32 must equal the exact integer result.
    const I: usize = 32;
    const O: usize = 8;
    let mut wb = [0u8; I * O * 4];
    let mut xb = [0u8; I * 4];
    let mut bb = [0u8; O * 4];
    let wv = |o: usize, i: usize| ((o * 7 + i * 3) % 11) as i32 - 5;
    let xv = |i: usize| ((i * 5) % 13) as i32 - 6;
    for o in 0..O {
        for i in 0..I {
            wb[(o * I + i) * 4..][..4].copy_from_slice(&(wv(o, i) as f32).to_le_bytes());
        }
        bb[o * 4..][..4].copy_from_slice(&((o as i32 * 3 - 10) as f32).to_le_bytes());
    }
    for i in 0..I {
        xb[i * 4..][..4].copy_from_slice(&(xv(i) as f32).to_le_bytes());
    }
    let mut yb = [0u8; O * 4];
    dense_f32(
        &DenseF32 {
            inputs: I,
            weights: &wb,
            bias: &bb,
            relu: false,
        },
        &xb,
        &mut yb,
    );
    for o in 0..O {
        let exact: i32 = (0..I).map(|i| wv(o, i) * xv(i)).sum::<i32>() + o as i32 * 3 - 10;
        let got = f32_at(&yb, o);
        t.check(
            got == exact as f32,
            format_args!("FAIL dense f32 row {o}: {got} vs {exact}"),
        );
    }
}

fn softmax_reference(t: &mut Tally) {
    // Reference: numpy float64 max-subtracted softmax. f32 with libm's expf keeps each
    // probability within 2e-6 of it (tolerance: rule of thumb, common practice, no source).
    let mut buf = [0f32; 32];
    for (i, &(logits, probs)) in cases::SOFTMAX.iter().enumerate() {
        let Some(s) = buf.get_mut(..logits.len()) else {
            t.check(false, format_args!("FAIL softmax case {i}: too long"));
            continue;
        };
        for (d, &b) in s.iter_mut().zip(logits) {
            *d = f32::from_bits(b);
        }
        softmax(s);
        let worst = s
            .iter()
            .zip(probs)
            .map(|(&g, &w)| libm::fabs(f64::from(g) - w))
            .fold(0.0, f64::max);
        let sum: f32 = s.iter().sum();
        t.check(
            worst <= 2e-6 && libm::fabsf(sum - 1.0) <= 1e-5,
            format_args!("FAIL softmax case {i}: max error {worst:e}, sum {sum}"),
        );
    }
}

fn output_cases(t: &mut Tally) {
    // sigmoid(0) = 1/2 exactly; sigmoid(-x) = 1 - sigmoid(x) to within an ulp.
    t.check(
        sigmoid(0.0) == 0.5,
        format_args!("FAIL sigmoid(0) = {}", sigmoid(0.0)),
    );
    let (a, b) = (sigmoid(2.0), sigmoid(-2.0));
    t.check(
        libm::fabsf(a + b - 1.0) <= 1.2e-7,
        format_args!("FAIL sigmoid symmetry {a} {b}"),
    );
    // sigmoid(2) = 1 / (1 + e^-2) = 0.8807970779778823 (float64, recalled value of e^-2 =
    // 0.1353352832366127).
    t.check(
        libm::fabsf(a - 0.880_797_1) <= 1e-7,
        format_args!("FAIL sigmoid(2) = {a}"),
    );
    // Ties resolve to the lowest index.
    let am = argmax(&[0.1, 0.7, 0.7, 0.2]);
    t.check(
        am == Some((1, 0.7)),
        format_args!("FAIL argmax tie: {am:?}"),
    );
    t.check(
        argmax(&[]).is_none(),
        format_args!("FAIL argmax of nothing"),
    );
}

fn corrupted_blob_is_rejected(t: &mut Tally) {
    use kinglet_fw_vectors::assets::VIBRATION;
    let mut copy = [0u8; 4096];
    let Some(buf) = copy.get_mut(..VIBRATION.len()) else {
        t.check(false, format_args!("FAIL blob too large for the copy"));
        return;
    };
    buf.copy_from_slice(VIBRATION);
    t.check(
        kinglet_runtime::Model::parse(buf).is_ok(),
        format_args!("FAIL intact blob rejected"),
    );
    let mid = buf.len() / 2;
    if let Some(b) = buf.get_mut(mid) {
        *b ^= 0x10;
    }
    let r = kinglet_runtime::Model::parse(buf);
    t.check(r.is_err(), format_args!("FAIL flipped bit accepted"));
}
