//! On-target self-check: the target's kernels against the portable ones (and the naive
//! baseline) on many random shapes, weights and inputs, output bytes compared exactly.
use crate::blobs::Aligned;
use crate::naive;
use crate::rng::Rng;
#[cfg(kb_big_f32)]
use kinglet_runtime::unstable::dense::DenseF32;
use kinglet_runtime::unstable::dense::{self, portable, DenseI8};
use kinglet_runtime::unstable::wire::{layout, nibble};

const MAX_IN: usize = 70;
#[cfg(kb_big_f32)]
const MAX_OUT: usize = 40;
#[cfg(not(kb_big_f32))]
const MAX_OUT: usize = 24;
const MAX_OM: usize = MAX_IN * MAX_OUT;
const MAX_BL: usize = layout::MAX_PAD + 72 * MAX_OUT;

/// Pass and fail counts.
#[derive(Default)]
pub struct Tally {
    /// Cases whose every output agreed.
    pub passed: u32,
    /// Cases with a disagreement.
    pub failed: u32,
}

impl Tally {
    fn record(&mut self, ok: bool) {
        if ok {
            self.passed += 1;
        } else {
            self.failed += 1;
        }
    }
}

/// One random int8 case; `true` if every kernel agreed with the portable output-major one.
fn int8_case(rng: &mut Rng) -> bool {
    let n = rng.range(1, MAX_IN as i32) as usize;
    let m = rng.range(1, MAX_OUT as i32) as usize;
    let (wmode, xmode) = (rng.next_u32() % 8, rng.next_u32() % 8);
    let mut w = [0i8; MAX_OM];
    let w = &mut w[..n * m];
    for v in w.iter_mut() {
        *v = rng.i8_byte(wmode) as i8;
    }
    let mut x = [0u8; MAX_IN];
    for v in x[..n].iter_mut() {
        *v = rng.i8_byte(xmode);
    }
    let om: &mut [u8] = &mut [0u8; MAX_OM][..n * m];
    for (d, &s) in om.iter_mut().zip(w.iter()) {
        *d = s as u8;
    }
    let pad = (rng.next_u32() % 4) as usize;
    let mut field = Aligned([0u8; MAX_BL]);
    let len = layout::elements(n, m);
    let field = &mut field.0[..pad + len];
    if !layout::block_i8(n, m, w, &mut field[pad..]) {
        return false;
    }
    let mut bias = [0u8; 4 * MAX_OUT];
    let mut mult = [0u8; 4 * MAX_OUT];
    let mut shift = [0u8; MAX_OUT];
    let wide = rng.next_u32().is_multiple_of(4);
    for o in 0..m {
        // Any bias the format accepts: |bias| + 128·Σ|w| ≤ 2^31 - 1 (capped at 2^24 mostly).
        let sum: i64 = w[o * n..(o + 1) * n]
            .iter()
            .map(|&v| i64::from(v).abs())
            .sum();
        let cap = if wide { i64::MAX } else { 1 << 24 };
        let room = (i64::from(i32::MAX) - 128 * sum).min(cap).max(0) as u32;
        let b = (u64::from(rng.next_u32()) % (2 * u64::from(room) + 1)) as i64 - i64::from(room);
        bias[4 * o..4 * o + 4].copy_from_slice(&(b as i32).to_le_bytes());
        let mul = (1u32 << 30) + (rng.next_u32() & 0x3FFF_FFFF);
        mult[4 * o..4 * o + 4].copy_from_slice(&(mul as i32).to_le_bytes());
    }
    for s in shift[..m].iter_mut() {
        *s = if wide {
            rng.range(-31, 31)
        } else {
            rng.range(-1, 12)
        } as i8 as u8;
    }
    let (base, blocked) = case_params(
        n,
        om,
        field,
        &bias[..4 * m],
        &mult[..4 * m],
        &shift[..m],
        rng,
    );
    let mut reference = [0u8; MAX_OUT];
    portable::dense_i8(&base, &x[..n], &mut reference[..m]);
    let mut ok = true;
    let mut out = [0u8; MAX_OUT];
    dense::dense_i8_blocked_auto(&blocked, &x[..n], &mut out[..m]);
    ok &= out[..m] == reference[..m];
    let mut out = [0u8; MAX_OUT];
    portable::dense_i8_blocked_portable(&blocked, &x[..n], &mut out[..m]);
    ok &= out[..m] == reference[..m];
    let mut out = [0u8; MAX_OUT];
    dense::m0::dense_i8_blocked_m0_rust(&blocked, &x[..n], &mut out[..m]);
    ok &= out[..m] == reference[..m];
    let mut out = [0u8; MAX_OUT];
    naive::dense_i8(&base, &x[..n], &mut out[..m]);
    ok &= out[..m] == reference[..m];
    ok & int4_case(n, m, w, &x[..n], &base, pad)
}

/// The int4 kernels (`FORMAT.md` §3.5) on the int8 case's shape and parameters, its weights
/// shifted into [-8, 7] (their bound stays within the int8 one the biases were drawn for), at
/// the same alignment: this build's kernel and the portable one against the naive one.
fn int4_case(n: usize, m: usize, w: &mut [i8], x: &[u8], base: &DenseI8<'_>, pad: usize) -> bool {
    for v in w.iter_mut() {
        *v >>= 4;
    }
    let mut field = Aligned([0u8; nibble::MAX_PAD + 36 * MAX_OUT]);
    let field = &mut field.0[..pad + nibble::bytes(n, m)];
    if !nibble::pack(n, m, w, &mut field[pad..]) {
        return false;
    }
    let p = DenseI8 {
        weights: field,
        ..*base
    };
    let mut reference = [0u8; MAX_OUT];
    naive::dense_i4(&p, x, &mut reference[..m]);
    let mut ok = true;
    let mut out = [0u8; MAX_OUT];
    dense::dense_i4_auto(&p, x, &mut out[..m]);
    ok &= out[..m] == reference[..m];
    let mut out = [0u8; MAX_OUT];
    dense::int4::dense_i4_portable(&p, x, &mut out[..m]);
    ok &= out[..m] == reference[..m];
    ok
}

/// One random f32 case.
#[cfg(kb_big_f32)]
fn f32_case(rng: &mut Rng) -> bool {
    let n = rng.range(1, MAX_IN as i32) as usize;
    let m = rng.range(1, MAX_OUT as i32) as usize;
    let mut w = [0f32; MAX_OM];
    let w = &mut w[..n * m];
    for v in w.iter_mut() {
        *v = rng.f32();
    }
    let mut om = [0u8; 4 * MAX_OM];
    for (d, v) in om.chunks_exact_mut(4).zip(w.iter()) {
        d.copy_from_slice(&v.to_le_bytes());
    }
    let pad = (rng.next_u32() % 4) as usize;
    let mut field = Aligned([0u8; 4 * MAX_BL]);
    let field = &mut field.0[..pad + 4 * layout::elements(n, m)];
    if !layout::block_f32(n, m, w, &mut field[pad..]) {
        return false;
    }
    let xoff = (rng.next_u32() % 2) as usize * 2; // aligned or not
    let mut x = Aligned([0u8; 4 * MAX_IN + 2]);
    for c in x.0[xoff..xoff + 4 * n].chunks_exact_mut(4) {
        c.copy_from_slice(&rng.f32().to_le_bytes());
    }
    let x = &x.0[xoff..xoff + 4 * n];
    let mut bias = [0u8; 4 * MAX_OUT];
    for c in bias[..4 * m].chunks_exact_mut(4) {
        c.copy_from_slice(&rng.f32().to_le_bytes());
    }
    let relu = rng.next_u32().is_multiple_of(2);
    let (b, om) = (&bias[..4 * m], &om[..4 * n * m]);
    let blocked = DenseF32 {
        inputs: n,
        weights: field,
        bias: b,
        relu,
    };
    let output_major = DenseF32 {
        weights: om,
        ..blocked
    };
    let mut reference = [0u8; 4 * MAX_OUT];
    portable::dense_f32(&output_major, x, &mut reference[..4 * m]);
    let mut ok = true;
    let mut out = [0u8; 4 * MAX_OUT];
    dense::dense_f32_blocked_auto(&blocked, x, &mut out[..4 * m]);
    ok &= out[..4 * m] == reference[..4 * m];
    let mut out = [0u8; 4 * MAX_OUT];
    portable::dense_f32_blocked_portable(&blocked, x, &mut out[..4 * m]);
    ok &= out[..4 * m] == reference[..4 * m];
    let mut out = [0u8; 4 * MAX_OUT];
    naive::dense_f32(n, om, b, relu, x, &mut out[..4 * m]);
    ok &= out[..4 * m] == reference[..4 * m];
    ok
}

/// Runs `cases` random int8 cases (and as many f32 ones on the FPU target).
/// The layer of a case over output-major weights `om` and their blocked field `field`, with a
/// random output zero point and, half the time, a ReLU clamp at it (drawn in that order).
fn case_params<'a>(
    n: usize,
    om: &'a [u8],
    field: &'a [u8],
    bias: &'a [u8],
    multiplier: &'a [u8],
    shift: &'a [u8],
    rng: &mut Rng,
) -> (DenseI8<'a>, DenseI8<'a>) {
    let zp = rng.next_u32() as u8 as i8;
    let relu = rng.next_u32().is_multiple_of(2);
    let base = DenseI8 {
        inputs: n,
        weights: om,
        bias,
        multiplier,
        shift,
        zero_point: zp,
        act_min: if relu { zp } else { -128 },
        act_max: 127,
        table: None,
    };
    (
        base,
        DenseI8 {
            weights: field,
            ..base
        },
    )
}

pub fn run(cases: u32, seed: u32) -> Tally {
    let mut rng = Rng::new(seed);
    let mut t = Tally::default();
    for _ in 0..cases {
        t.record(int8_case(&mut rng));
        #[cfg(kb_big_f32)]
        t.record(f32_case(&mut rng));
    }
    t
}

/// One random case of the first-layer kernels of an int16-input model (`FORMAT.md` §3.6,
/// `runtime/src/dense/wide.rs`): output-major and `Blocked4x4` (at a random alignment) against
/// the naive sum, full-range int16 inputs (one case in 8 all −32768, one all 32767), biases up
/// to the format's bound `|bias| + 32768 · Σ|w| ≤ 2^31 − 1`.
fn int16_input_case(rng: &mut Rng) -> bool {
    use kinglet_runtime::unstable::dense::wide;
    let n = rng.range(1, MAX_IN as i32) as usize;
    let m = rng.range(1, MAX_OUT as i32) as usize;
    let (wmode, xmode) = (rng.next_u32() % 8, rng.next_u32() % 8);
    let mut w = [0i8; MAX_OM];
    let w = &mut w[..n * m];
    for v in w.iter_mut() {
        *v = rng.i8_byte(wmode) as i8;
    }
    let mut x = [0u8; 2 * MAX_IN];
    for c in x[..2 * n].chunks_exact_mut(2) {
        let v = match xmode {
            0 => i16::MIN,
            1 => i16::MAX,
            _ => rng.next_u32() as i16,
        };
        c.copy_from_slice(&v.to_le_bytes());
    }
    let x = &x[..2 * n];
    let om: &mut [u8] = &mut [0u8; MAX_OM][..n * m];
    for (d, &s) in om.iter_mut().zip(w.iter()) {
        *d = s as u8;
    }
    let pad = (rng.next_u32() % 4) as usize;
    let mut field = Aligned([0u8; MAX_BL]);
    let field = &mut field.0[..pad + layout::elements(n, m)];
    if !layout::block_i8(n, m, w, &mut field[pad..]) {
        return false;
    }
    let mut bias = [0u8; 4 * MAX_OUT];
    let mut mult = [0u8; 4 * MAX_OUT];
    let mut shift = [0u8; MAX_OUT];
    for o in 0..m {
        let sum: i64 = w[o * n..(o + 1) * n]
            .iter()
            .map(|&v| i64::from(v).abs())
            .sum();
        // 32768 · Σ|w| ≤ 32768 · 128 · 70 < 2^29: every row has room for a bias.
        let room = (i64::from(i32::MAX) - 32_768 * sum).max(0) as u32;
        let b = (u64::from(rng.next_u32()) % (2 * u64::from(room) + 1)) as i64 - i64::from(room);
        bias[4 * o..4 * o + 4].copy_from_slice(&(b as i32).to_le_bytes());
        let mul = (1u32 << 30) + (rng.next_u32() & 0x3FFF_FFFF);
        mult[4 * o..4 * o + 4].copy_from_slice(&(mul as i32).to_le_bytes());
    }
    for s in shift[..m].iter_mut() {
        *s = rng.range(-2, 31) as i8 as u8;
    }
    let (base, blocked) = case_params(
        n,
        om,
        field,
        &bias[..4 * m],
        &mult[..4 * m],
        &shift[..m],
        rng,
    );
    let mut reference = [0u8; MAX_OUT];
    naive::dense_i16(&base, x, &mut reference[..m]);
    let mut om_out = [0u8; MAX_OUT];
    wide::dense_i16(&base, x, &mut om_out[..m]);
    let mut bl_out = [0u8; MAX_OUT];
    wide::dense_i16_blocked(&blocked, x, &mut bl_out[..m]);
    om_out[..m] == reference[..m] && bl_out[..m] == reference[..m]
}

/// Runs `cases` random cases of the int16-input first-layer kernels.
pub fn run_int16_input(cases: u32, seed: u32) -> Tally {
    let mut rng = Rng::new(seed);
    let mut t = Tally::default();
    for _ in 0..cases {
        t.record(int16_input_case(&mut rng));
    }
    t
}
