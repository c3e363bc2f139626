//! Kernels for Cortex-M4/M7 (Armv7E-M with the DSP extension), and the FPU f32 kernel for the
//! hard-float targets. This is the runtime's only module with `unsafe` code.
//!
//! # Why `unsafe`
//!
//! The dual 16-bit multiply-accumulate `SMLAD` and the byte unpacking `SXTB16`/`UXTB16` have
//! no stable Rust intrinsics (the ACLE intrinsics in `core::arch::arm` are unstable), and the
//! compiler does not find them on its own; `VMLA` (non-fused multiply-accumulate) likewise. So
//! the inner loops are written with `asm!`, which is `unsafe`.
//!
//! # Invariants the `asm!` blocks rely on
//!
//! Every block reads memory only, never writes it, and stays inside the two slices it is given:
//! - the weight pointer walks `n` groups of 16 elements (16 bytes int8, 64 bytes f32) and the
//!   input pointer `n` groups of 4 elements, where `n` is the smaller of the two slices' group
//!   counts, computed in safe code right before the block; the block is skipped when `n` is 0;
//! - `LDM`/`VLDM` (which fault on unaligned addresses) are only used when the weight pointer is
//!   4-byte aligned, checked in safe code; otherwise int8 uses `LDR` (unaligned loads are
//!   architecturally allowed on Armv7-M with the reset value of `CCR.UNALIGN_TRP`) and f32 the
//!   portable kernel;
//! - inputs are read with `LDR`, so their alignment does not matter;
//! - every register the block writes is declared as an output or clobber, except the FPU
//!   registers, which the block saves and restores itself (`VPUSH`/`VPOP`: `s`-register
//!   operands need a double-precision FPU in `asm!`, which a Cortex-M4F does not have).
//!
//! The accumulation is exact integer arithmetic modulo 2^32 (int8) and the same sequence of
//! rounded multiplies and adds per row as the portable kernel (f32), so the results are
//! bit-identical to [`super::portable`].
use core::arch::asm;

use super::layout::{self, BLOCK_ROWS, GROUP, GROUP_ELEMS};
use super::portable::{excess_correction, finish_block, group_i8, row_params};
use super::DenseI8;

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

/// Adds the full groups of one block (`w`, excess-128 weights) times `x` into `acc`.
#[inline(always)]
fn groups_i8(w: &[[u8; GROUP_ELEMS]], x: &[[u8; GROUP]], acc: &mut [i32; BLOCK_ROWS]) {
    let n = w.len().min(x.len());
    if n == 0 {
        return;
    }
    let [mut a0, mut a1, mut a2, mut a3] = *acc;
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
    *acc = [a0, a1, a2, a3];
}

/// Runs an int8 dense layer with `Blocked4x4` weights; the same results as
/// [`super::portable::dense_i8_blocked`].
pub fn dense_i8_blocked(p: &DenseI8<'_>, input: &[u8], output: &mut [u8]) {
    let n = p.inputs;
    let Some((_, data)) = layout::split(p.weights, n, output.len(), 1) else {
        return;
    };
    let x = input.get(..n).unwrap_or(&[]);
    let (full, tail) = x.as_chunks::<GROUP>();
    let correction = excess_correction(x, n);
    let mut params = row_params(p);
    let block_len = layout::padded(n) * BLOCK_ROWS;
    for (block, out) in data
        .chunks_exact(block_len.max(1))
        // `&mut`: zipping the plain `ChunksMut` takes core's random-access `Zip::new`, which is
        // not inlined here and keeps a division-by-zero panic path (scripts/no-panic-check.sh).
        .zip(&mut output.chunks_mut(BLOCK_ROWS))
    {
        let groups = block.as_chunks::<GROUP_ELEMS>().0;
        let mut acc = [0i32; BLOCK_ROWS];
        groups_i8(groups, full, &mut acc);
        if let Some(g) = groups.get(full.len()) {
            group_i8(g, tail, &mut acc);
        }
        finish_block(p, acc, correction, &mut params, out);
    }
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
/// [`super::portable::dense_f32_blocked`]. Falls back to it when the weight data is not 4-byte
/// aligned.
#[cfg(kinglet_fpu)]
pub fn dense_f32_blocked(
    inputs: usize,
    weights: &[u8],
    bias: &[u8],
    relu: bool,
    input: &[u8],
    output: &mut [u8],
) {
    let n = inputs;
    let outs = output.as_chunks_mut::<4>().0;
    let Some((_, data)) = layout::split(weights, n, outs.len(), 4) else {
        return;
    };
    if !(data.as_ptr() as usize).is_multiple_of(4) {
        return super::portable::dense_f32_blocked(inputs, weights, bias, relu, input, output);
    }
    let x = input.get(..n * 4).unwrap_or(&[]);
    let (full, tail) = x.as_chunks::<{ GROUP * 4 }>();
    let block_len = layout::padded(n) * BLOCK_ROWS * 4;
    let mut biases = crate::le::f32s(bias);
    for (block, out) in data
        .chunks_exact(block_len.max(1))
        .zip(&mut outs.chunks_mut(BLOCK_ROWS))
    // `&mut`: see `dense_i8_blocked`
    {
        let groups = block.as_chunks::<{ GROUP_ELEMS * 4 }>().0;
        let mut acc = [0.0f32; BLOCK_ROWS];
        groups_f32(groups, full, &mut acc);
        if let Some(g) = groups.get(full.len()) {
            for (a, row) in acc.iter_mut().zip(g.chunks_exact(GROUP * 4)) {
                for (w, x) in crate::le::f32s(row).zip(crate::le::f32s(tail)) {
                    *a += w * x;
                }
            }
        }
        for (o, (a, b)) in out.iter_mut().zip(acc.into_iter().zip(&mut biases)) {
            let mut v = a + b;
            if relu && v < 0.0 {
                v = 0.0;
            }
            *o = v.to_le_bytes();
        }
    }
}
