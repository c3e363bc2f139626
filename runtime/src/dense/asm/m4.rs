//! Kernels for Cortex-M4/M7 (Armv7E-M with the DSP extension), and the FPU f32 kernel for the
//! hard-float targets. See [`super`] for why they are `asm!` and the invariants they keep.
use core::arch::asm;

use crate::dense::fixed::{blocks_i4, blocks_i8};
#[cfg(kinglet_fpu)]
use crate::dense::DenseF32;
use crate::dense::DenseI8;
use crate::wire::layout::{BLOCK_ROWS, GROUP, GROUP_ELEMS};
use crate::wire::nibble::GROUP_BYTES;

/// One 4-input group for 4 rows. `$load` loads the next two rows' weight words into r4, r5.
macro_rules! group_i8 {
    ($load:literal) => {
        concat!(
            "ldr r9, [lr], #4\n",
            "sxtb16 r8, r9\n",
            "sxtb16 r9, r9, ror #8\n",
            $load,
            "uxtb16 r10, r4\n",
            "uxtb16 r4, r4, ror #8\n",
            "smlad r0, r10, r8, r0\n",
            "smlad r0, r4, r9, r0\n",
            "uxtb16 r10, r5\n",
            "uxtb16 r5, r5, ror #8\n",
            "smlad r1, r10, r8, r1\n",
            "smlad r1, r5, r9, r1\n",
            $load,
            "uxtb16 r10, r4\n",
            "uxtb16 r4, r4, ror #8\n",
            "smlad r2, r10, r8, r2\n",
            "smlad r2, r4, r9, r2\n",
            "uxtb16 r10, r5\n",
            "uxtb16 r5, r5, ror #8\n",
            "smlad r3, r10, r8, r3\n",
            "smlad r3, r5, r9, r3\n",
        )
    };
}

/// The int8 loop over `n >= 1` groups, two per pass; an odd count enters at the second.
macro_rules! loop_i8 {
    ($load:literal) => {
        concat!(
            "tst r11, #1\n",
            "add r11, lr, r11, lsl #2\n",
            "bne 2f\n",
            "1:\n",
            group_i8!($load),
            "2:\n",
            group_i8!($load),
            "cmp lr, r11\n",
            "bne 1b\n",
        )
    };
}

/// The full groups of one block (`w`, excess-128 weights) times `x`: the 4 accumulators.
#[inline(always)]
fn groups_i8(w: &[[u8; GROUP_ELEMS]], x: &[[u8; GROUP]]) -> [i32; BLOCK_ROWS] {
    let n = w.len().min(x.len());
    let [mut a0, mut a1, mut a2, mut a3] = [0i32; BLOCK_ROWS];
    if n == 0 {
        return [a0, a1, a2, a3];
    }
    let (wp, xp) = (w.as_ptr(), x.as_ptr());
    if (wp as usize).is_multiple_of(4) {
        // SAFETY: see the module documentation: `n` groups of both slices, aligned for LDM.
        unsafe {
            asm!(
                loop_i8!("ldm r12!, {{r4, r5}}\n"),
                inout("r0") a0, inout("r1") a1, inout("r2") a2, inout("r3") a3,
                inout("r12") wp => _, inout("lr") xp => _, inout("r11") n => _,
                out("r4") _, out("r5") _, out("r8") _, out("r9") _, out("r10") _,
                options(readonly, nostack),
            );
        }
    } else {
        // SAFETY: as above, with unaligned-capable LDR for the weights.
        unsafe {
            asm!(
                loop_i8!("ldr r4, [r12], #4\nldr r5, [r12], #4\n"),
                inout("r0") a0, inout("r1") a1, inout("r2") a2, inout("r3") a3,
                inout("r12") wp => _, inout("lr") xp => _, inout("r11") n => _,
                out("r4") _, out("r5") _, out("r8") _, out("r9") _, out("r10") _,
                options(readonly, nostack),
            );
        }
    }
    [a0, a1, a2, a3]
}

/// `128 · Σ x` over the first `n` inputs, as [`crate::dense::portable::excess_correction`]:
/// `USADA8` adds the 4 bytes of a word flipped to excess-128 (`x + 128`).
#[inline(always)]
fn excess_correction(input: &[u8], n: usize) -> i32 {
    let x = input.get(..n).unwrap_or(input);
    let (words, rest) = x.as_chunks::<4>();
    let mut sum = rest.iter().map(|&v| i32::from(v as i8)).sum::<i32>();
    let k = words.len();
    if k > 0 {
        let mut s = 0i32;
        // SAFETY: see the module documentation of `super`: `k ≥ 1` words of `words`, read with
        // unaligned-capable LDR.
        unsafe {
            asm!(
                "add {end}, {p}, {k}, lsl #2",
                "1:",
                "ldr {t}, [{p}], #4",
                "eor {t}, {t}, #0x80808080",
                "usada8 {s}, {t}, {zero}, {s}",
                "cmp {p}, {end}",
                "bne 1b",
                p = inout(reg) words.as_ptr() => _,
                k = in(reg) k,
                end = out(reg) _,
                t = out(reg) _,
                s = inout(reg) s,
                zero = in(reg) 0u32,
                options(readonly, nostack),
            );
        }
        sum = sum
            .wrapping_add(s)
            .wrapping_sub((k as i32).wrapping_mul(512));
    }
    sum.wrapping_mul(128)
}

/// Runs an int8 dense layer with `Blocked4x4` weights; the same results as
/// [`crate::dense::portable::dense_i8_blocked_portable`].
pub fn dense_i8_blocked_m4_asm(p: &DenseI8<'_>, input: &[u8], output: &mut [u8]) {
    let correction = excess_correction(input, p.inputs);
    blocks_i8(p, input, output, correction, groups_i8);
}

/// One int4 row pair of a group: its weight word in `$w` (bytes `u`, 4 inputs), the inputs'
/// pairs in r8 `(x0, x2)` and r9 `(x1, x3)`: `$s += Σ u x`, `$l += Σ (u & 15) x`.
macro_rules! pair_i4 {
    ($w:literal, $s:literal, $l:literal) => {
        concat!(
            "uxtb16 r10, ",
            $w,
            "\n",
            "smlad ",
            $s,
            ", r10, r8, ",
            $s,
            "\n",
            "uxtb16 r10, ",
            $w,
            ", ror #8\n",
            "smlad ",
            $s,
            ", r10, r9, ",
            $s,
            "\n",
            "and ",
            $w,
            ", ",
            $w,
            ", #0x0F0F0F0F\n",
            "uxtb16 r10, ",
            $w,
            "\n",
            "smlad ",
            $l,
            ", r10, r8, ",
            $l,
            "\n",
            "uxtb16 ",
            $w,
            ", ",
            $w,
            ", ror #8\n",
            "smlad ",
            $l,
            ", ",
            $w,
            ", r9, ",
            $l,
            "\n",
        )
    };
}

/// One int4 group: 4 inputs, both row pairs (`$load` puts their words in r4, r5).
macro_rules! group_i4 {
    ($load:literal) => {
        concat!(
            "ldr r9, [lr], #4\n",
            "sxtb16 r8, r9\n",
            "sxtb16 r9, r9, ror #8\n",
            $load,
            pair_i4!("r4", "r0", "r1"),
            pair_i4!("r5", "r2", "r3"),
        )
    };
}

/// The int4 loop over `n >= 1` groups, two per pass; an odd count enters at the second.
macro_rules! loop_i4 {
    ($load:literal) => {
        concat!(
            "tst r11, #1\n",
            "add r11, lr, r11, lsl #2\n",
            "bne 2f\n",
            "1:\n",
            group_i4!($load),
            "2:\n",
            group_i4!($load),
            "cmp lr, r11\n",
            "bne 1b\n",
        )
    };
}

/// The full groups of one int4 block (`FORMAT.md` §3.5) times `x`: the sums `[S0, L0, S1, L1]`
/// of [`crate::dense::int4`].
#[inline(always)]
fn groups_i4(w: &[[u8; GROUP_BYTES]], x: &[[u8; GROUP]]) -> [i32; BLOCK_ROWS] {
    let n = w.len().min(x.len());
    let [mut a0, mut a1, mut a2, mut a3] = [0i32; BLOCK_ROWS];
    if n == 0 {
        return [a0, a1, a2, a3];
    }
    let (wp, xp) = (w.as_ptr(), x.as_ptr());
    // One loop for any alignment (unaligned-capable LDR): an aligned twin with LDRD would save
    // one instruction per 16 MACs and cost about 200 bytes of flash.
    // SAFETY: see the module documentation: `n` groups of both slices (8 weight bytes and 4
    // inputs each), read with LDR.
    unsafe {
        asm!(
            loop_i4!("ldr r4, [r12], #4\nldr r5, [r12], #4\n"),
            inout("r0") a0, inout("r1") a1, inout("r2") a2, inout("r3") a3,
            inout("r12") wp => _, inout("lr") xp => _, inout("r11") n => _,
            out("r4") _, out("r5") _, out("r8") _, out("r9") _, out("r10") _,
            options(readonly, nostack),
        );
    }
    [a0, a1, a2, a3]
}

/// Runs an int8 dense layer with int4 `Nibble4x4` weights; the same results as
/// [`crate::dense::int4::dense_i4_portable`].
// Out of line: `infer` and `classify` both reach it, and inlined it would be in flash twice.
#[inline(never)]
pub fn dense_i4_m4_asm(p: &DenseI8<'_>, input: &[u8], output: &mut [u8]) {
    let correction = excess_correction(input, p.inputs);
    blocks_i4(p, input, output, correction, groups_i4);
}

/// One f32 group: 4 inputs (loaded into s4-s7 by `$x`), 16 weights into s8-s23, 16 `VMLA`.
#[cfg(kinglet_fpu)]
macro_rules! group_f32 {
    ($x:literal) => {
        concat!(
            $x,
            "vldm r12!, {{s8-s23}}\n",
            "vmla.f32 s0, s8, s4\n",
            "vmla.f32 s0, s9, s5\n",
            "vmla.f32 s0, s10, s6\n",
            "vmla.f32 s0, s11, s7\n",
            "vmla.f32 s1, s12, s4\n",
            "vmla.f32 s1, s13, s5\n",
            "vmla.f32 s1, s14, s6\n",
            "vmla.f32 s1, s15, s7\n",
            "vmla.f32 s2, s16, s4\n",
            "vmla.f32 s2, s17, s5\n",
            "vmla.f32 s2, s18, s6\n",
            "vmla.f32 s2, s19, s7\n",
            "vmla.f32 s3, s20, s4\n",
            "vmla.f32 s3, s21, s5\n",
            "vmla.f32 s3, s22, s6\n",
            "vmla.f32 s3, s23, s7\n",
        )
    };
}

/// The f32 loop over `n >= 1` groups, with the accumulators' bits in r0-r3.
#[cfg(kinglet_fpu)]
macro_rules! loop_f32 {
    ($x:literal) => {
        concat!(
            "vpush {{s0-s23}}\n",
            "vmov s0, s1, r0, r1\n",
            "vmov s2, s3, r2, r3\n",
            "add r11, lr, r11, lsl #4\n",
            "1:\n",
            group_f32!($x),
            "cmp lr, r11\n",
            "bne 1b\n",
            "vmov r0, r1, s0, s1\n",
            "vmov r2, r3, s2, s3\n",
            "vpop {{s0-s23}}\n",
        )
    };
}

/// Adds the full groups of one f32 block (`w`, 4-byte aligned) times `x` into `acc`, in order.
#[cfg(kinglet_fpu)]
#[inline(always)]
fn groups_f32(w: &[[u8; GROUP_ELEMS * 4]], x: &[[u8; GROUP * 4]], acc: &mut [f32; BLOCK_ROWS]) {
    let n = w.len().min(x.len());
    let (wp, xp) = (w.as_ptr(), x.as_ptr());
    if n == 0 || !(wp as usize).is_multiple_of(4) {
        return;
    }
    let [mut a0, mut a1, mut a2, mut a3] = acc.map(f32::to_bits);
    if (xp as usize).is_multiple_of(4) {
        // SAFETY: see the module documentation: `n` groups of both slices, both aligned for
        // VLDM; s0-s23 are saved and restored inside the block.
        unsafe {
            asm!(
                loop_f32!("vldm lr!, {{s4-s7}}\n"),
                inout("r0") a0, inout("r1") a1, inout("r2") a2, inout("r3") a3,
                inout("r12") wp => _, inout("lr") xp => _, inout("r11") n => _,
                options(readonly),
            );
        }
    } else {
        // SAFETY: as above, the inputs read with unaligned-capable LDR.
        unsafe {
            asm!(
                loop_f32!("ldr r4, [lr], #4\nldr r5, [lr], #4\nldr r8, [lr], #4\nldr r9, [lr], #4\nvmov s4, s5, r4, r5\nvmov s6, s7, r8, r9\n"),
                inout("r0") a0, inout("r1") a1, inout("r2") a2, inout("r3") a3,
                inout("r12") wp => _, inout("lr") xp => _, inout("r11") n => _,
                out("r4") _, out("r5") _, out("r8") _, out("r9") _,
                options(readonly),
            );
        }
    }
    *acc = [a0, a1, a2, a3].map(f32::from_bits);
}

/// Runs an f32 dense layer with `Blocked4x4` weights; the same results as
/// [`crate::dense::portable::dense_f32_blocked_portable`]. Weight data that is not 4-byte aligned takes
/// a plain Rust loop (slower, same results).
#[cfg(kinglet_fpu)]
pub fn dense_f32_blocked_m4_asm(p: &DenseF32<'_>, input: &[u8], output: &mut [u8]) {
    let outs = output.as_chunks_mut::<4>().0;
    let Some(crate::dense::blocked_f32::Cut { data, x, block_len }) =
        crate::dense::blocked_f32::cut(p, outs.len(), input)
    else {
        return;
    };
    let (full, _) = x.as_chunks::<{ GROUP * 4 }>();
    // The `asm!` loop needs aligned weights (`VLDM`); otherwise every group takes the Rust loop
    // below, which adds in the same order.
    let aligned = (data.as_ptr() as usize).is_multiple_of(4);
    let asm_groups = if aligned { full } else { &[] };
    let mut biases = crate::le::f32s(p.bias);
    for (block, out) in data
        .chunks_exact(block_len.max(1))
        .zip(&mut outs.chunks_mut(BLOCK_ROWS))
    // `&mut`: see `dense_i8_blocked_m4_asm`
    {
        let groups = block.as_chunks::<{ GROUP_ELEMS * 4 }>().0;
        let mut acc = [0.0f32; BLOCK_ROWS];
        groups_f32(groups, asm_groups, &mut acc);
        let rest = groups
            .iter()
            .zip(x.chunks(GROUP * 4))
            .skip(asm_groups.len());
        for (g, xg) in rest {
            for (a, row) in acc.iter_mut().zip(g.chunks_exact(GROUP * 4)) {
                for (w, x) in crate::le::f32s(row).zip(crate::le::f32s(xg)) {
                    *a += w * x;
                }
            }
        }
        crate::dense::blocked_f32::finish(&acc, &mut biases, p.relu, out);
    }
}
