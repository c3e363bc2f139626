//! int8 kernel for Cortex-M0/M0+ (Armv6-M; also Armv7-M without DSP and Armv8-M Baseline).
//! See [`super`] for why this is `asm!` and the invariants it keeps.
//!
//! Per 4-input group of a 4-row block (16 MACs): each input is loaded once (`LDRSB`, or
//! `LDRB` and `SXTB` where no offset register is free) and multiplied with its 4 rows' excess-128
//! weights, each one `LDRB` with an immediate offset, `MULS`, and `ADD` into an accumulator in
//! `r8`-`r11`; two groups per pass. About 3.6 instructions per MAC.
//!
//! int4 (`FORMAT.md` §3.5): per input (`LDRB` + `SXTB`), each of the two row-pair bytes `u` is
//! one `LDRB` with an immediate offset, `u & 15` two shifts, and two `MULS` + `ADD` into the
//! sums `S` and `L` of `crate::dense::int4` in `r8`-`r11`: 16 instructions per 4 MACs.
use core::arch::asm;

use crate::dense::fixed::blocks_i8;
use crate::dense::portable::excess_correction;
use crate::dense::DenseI8;
use crate::wire::layout::{BLOCK_ROWS, GROUP, GROUP_ELEMS};
use crate::wire::nibble::GROUP_BYTES;

/// The 4 rows' products with input `$x` (already in r2) of the group at weight offset `$g`.
macro_rules! column {
    ($g:literal, $k:literal) => {
        concat!(
            "ldrb r3, [r0, #",
            $g,
            " + ",
            $k,
            "]\n",
            "muls r3, r2, r3\n",
            "add r8, r3\n",
            "ldrb r3, [r0, #",
            $g,
            " + 4 + ",
            $k,
            "]\n",
            "muls r3, r2, r3\n",
            "add r9, r3\n",
            "ldrb r3, [r0, #",
            $g,
            " + 8 + ",
            $k,
            "]\n",
            "muls r3, r2, r3\n",
            "add r10, r3\n",
            "ldrb r3, [r0, #",
            $g,
            " + 12 + ",
            $k,
            "]\n",
            "muls r3, r2, r3\n",
            "add r11, r3\n",
        )
    };
}

/// One group: weights at `r0 + $g`, inputs at `r1 + $x`; `$x1` is the register holding
/// `$x + 1` (r4 = 1, r5 = 5) for the one `LDRSB` with a register offset.
macro_rules! group {
    ($g:literal, $x:literal, $x1:literal) => {
        concat!(
            "ldrb r2, [r1, #",
            $x,
            "]\n",
            "sxtb r2, r2\n",
            column!($g, "0"),
            "ldrsb r2, [r1, ",
            $x1,
            "]\n",
            column!($g, "1"),
            "ldrb r2, [r1, #",
            $x,
            " + 2]\n",
            "sxtb r2, r2\n",
            column!($g, "2"),
            "ldrb r2, [r1, #",
            $x,
            " + 3]\n",
            "sxtb r2, r2\n",
            column!($g, "3"),
        )
    };
}

/// The block's full groups (`w`, excess-128) times `x`: the 4 accumulators.
#[inline(always)]
fn groups(w: &[[u8; GROUP_ELEMS]], x: &[[u8; GROUP]]) -> [i32; BLOCK_ROWS] {
    let n = w.len().min(x.len());
    if n == 0 {
        return [0; BLOCK_ROWS];
    }
    let (a0, a1, a2, a3): (i32, i32, i32, i32);
    // SAFETY: see the module documentation of `super`: `n ≥ 1` groups of both slices, byte
    // loads only; the odd-count entry steps the pointers back by one group before any load.
    unsafe {
        asm!(
            "movs r2, #0",
            "mov r8, r2",
            "mov r9, r2",
            "mov r10, r2",
            "mov r11, r2",
            "lsls r2, r5, #2",
            "adds r2, r2, r1",
            "mov r12, r2",
            "movs r4, #1",
            "lsrs r5, r5, #1",
            // MOVS leaves the carry (the odd bit of n) alone.
            "movs r5, #5",
            "bcc 1f",
            "subs r0, #16",
            "subs r1, #4",
            "b 2f",
            "1:",
            group!("0", "0", "r4"),
            "2:",
            group!("16", "4", "r5"),
            "adds r0, #32",
            "adds r1, #8",
            "cmp r1, r12",
            "bne 1b",
            "mov r2, r8",
            "mov r3, r9",
            "mov r4, r10",
            "mov r5, r11",
            inout("r0") w.as_ptr() => _,
            inout("r1") x.as_ptr() => _,
            inout("r5") n => a3,
            out("r2") a0, out("r3") a1, out("r4") a2, out("r12") _,
            // Armv6-M `asm!` takes high registers as clobbers only: the accumulators start at 0
            // there and are copied out at the end.
            out("r8") _, out("r9") _, out("r10") _, out("r11") _,
            options(readonly, nostack),
        );
    }
    [a0, a1, a2, a3]
}

/// Runs an int8 dense layer with `Blocked4x4` weights; the same results as
/// [`crate::dense::portable::dense_i8_blocked_portable`].
pub fn dense_i8_blocked_m0_asm(p: &DenseI8<'_>, input: &[u8], output: &mut [u8]) {
    let correction = excess_correction(input, p.inputs);
    blocks_i8(p, input, output, correction, groups);
}

/// One int4 row pair's products with the input in r2: the byte at weight offset
/// `$g + $p + $k`, `$s += u x`, `$l += (u & 15) x` (`FORMAT.md` §3.5).
macro_rules! pair_i4 {
    ($g:literal, $p:literal, $k:literal, $s:literal, $l:literal) => {
        concat!(
            "ldrb r3, [r0, #",
            $g,
            " + ",
            $p,
            " + ",
            $k,
            "]\n",
            "lsls r4, r3, #28\n",
            "lsrs r4, r4, #28\n",
            "muls r3, r2, r3\n",
            "add ",
            $s,
            ", r3\n",
            "muls r4, r2, r4\n",
            "add ",
            $l,
            ", r4\n",
        )
    };
}

/// One int4 input `$k` of the group at weight offset `$g`, inputs at `r1 + $x`.
macro_rules! input_i4 {
    ($g:literal, $x:literal, $k:literal) => {
        concat!(
            "ldrb r2, [r1, #",
            $x,
            " + ",
            $k,
            "]\n",
            "sxtb r2, r2\n",
            pair_i4!($g, "0", $k, "r8", "r9"),
            pair_i4!($g, "4", $k, "r10", "r11"),
        )
    };
}

/// One int4 group (8 weight bytes, 4 inputs).
macro_rules! group_i4 {
    ($g:literal, $x:literal) => {
        concat!(
            input_i4!($g, $x, "0"),
            input_i4!($g, $x, "1"),
            input_i4!($g, $x, "2"),
            input_i4!($g, $x, "3"),
        )
    };
}

/// The full groups of one int4 block times `x`: the sums `[S0, L0, S1, L1]` of
/// [`crate::dense::int4`].
#[inline(always)]
fn groups_i4(w: &[[u8; GROUP_BYTES]], x: &[[u8; GROUP]]) -> [i32; BLOCK_ROWS] {
    let n = w.len().min(x.len());
    if n == 0 {
        return [0; BLOCK_ROWS];
    }
    let (a0, a1, a2, a3): (i32, i32, i32, i32);
    // SAFETY: see the module documentation of `super`: `n ≥ 1` groups of both slices, byte
    // loads only; the odd-count entry steps the pointers back by one group before any load.
    unsafe {
        asm!(
            "movs r2, #0",
            "mov r8, r2",
            "mov r9, r2",
            "mov r10, r2",
            "mov r11, r2",
            "lsls r2, r5, #2",
            "adds r2, r2, r1",
            "mov r12, r2",
            "lsrs r5, r5, #1",
            "bcc 1f",
            "subs r0, #8",
            "subs r1, #4",
            "b 2f",
            "1:",
            group_i4!("0", "0"),
            "2:",
            group_i4!("8", "4"),
            "adds r0, #16",
            "adds r1, #8",
            "cmp r1, r12",
            // Two groups are past the reach of a conditional branch back (256 bytes).
            "beq 3f",
            "b 1b",
            "3:",
            "mov r2, r8",
            "mov r3, r9",
            "mov r4, r10",
            "mov r5, r11",
            inout("r0") w.as_ptr() => _,
            inout("r1") x.as_ptr() => _,
            inout("r5") n => a3,
            out("r2") a0, out("r3") a1, out("r4") a2, out("r12") _,
            out("r8") _, out("r9") _, out("r10") _, out("r11") _,
            options(readonly, nostack),
        );
    }
    [a0, a1, a2, a3]
}

/// Runs an int8 dense layer with int4 `Nibble4x4` weights; the same results as
/// [`crate::dense::int4::dense_i4_portable`].
// Out of line: `infer` and `classify` both reach it, and inlined it would be in flash twice.
#[inline(never)]
pub fn dense_i4_m0_asm(p: &DenseI8<'_>, input: &[u8], output: &mut [u8]) {
    let correction = excess_correction(input, p.inputs);
    super::super::fixed::blocks_i4(p, input, output, correction, groups_i4);
}
