//! The target kernels written in `asm!`: the runtime's only module with `unsafe` code.
//!
//! - [`m4`] (Cortex-M4/M7, Armv7E-M with the DSP extension): int8 with `SMLAD` on
//!   `SXTB16`/`UXTB16`-unpacked pairs, `USADA8` for `Σ x`, int4 (`FORMAT.md` §3.5) with
//!   `UXTB16`-unpacked bytes and `AND #0x0F0F0F0F` low nibbles into `SMLAD`, and the FPU f32
//!   kernel (`VLDM`/`VMLA`) for the hard-float targets.
//! - [`m0`] (Cortex-M0/M0+, Armv6-M, also used on Armv7-M without DSP and Armv8-M Baseline):
//!   int8 and int4 with byte loads and `MULS`, the 4 accumulators (int4: the 4 sums of
//!   `super::int4`) in high registers.
//!
//! Only the innermost loops are `asm!`; the block loop, the partial last group, bias,
//! requantisation and stores are safe Rust shared with the host-tested kernels
//! (`super::fixed::blocks_i8`).
//!
//! # Why `unsafe`
//!
//! The dual 16-bit multiply-accumulate `SMLAD`, the byte unpacking `SXTB16`/`UXTB16` and the
//! byte sum `USADA8` have no stable Rust intrinsics (the ACLE intrinsics in `core::arch::arm`
//! are unstable), and the compiler does not find them on its own; `VMLA` (non-fused
//! multiply-accumulate) likewise. On Armv6-M the compiler spills the four accumulators of a
//! block to the stack (8 low registers), which the `asm!` loop avoids by keeping them in
//! `r8`-`r11` (`ADD` reaches the high registers). `asm!` is `unsafe`.
//!
//! # Invariants the `asm!` blocks rely on
//!
//! Every block reads memory only, never writes it, and stays inside the slices it is given:
//! - the weight pointer walks `n` groups of 16 elements (16 bytes int8, 8 bytes int4, 64 bytes
//!   f32) and the
//!   input pointer `n` groups of 4 elements, where `n` is the smaller of the two slices' group
//!   counts, computed in safe code right before the block; the block is skipped when `n` is 0
//!   (the sum loop of [`m4`] likewise walks the `n ≥ 1` whole words of its slice). A pointer
//!   may step below its slice's start before the first access (the odd-count entry of the
//!   loops), but every access is inside the slice;
//! - `LDM`/`VLDM` (which fault on unaligned addresses) are only used when the weight pointer is
//!   4-byte aligned, checked in safe code; otherwise int8 uses `LDR` (unaligned loads are
//!   architecturally allowed on Armv7-M with the reset value of `CCR.UNALIGN_TRP`) and f32 the
//!   portable kernel; the Armv6-M kernel only makes byte loads;
//! - inputs are read with `LDR` (Armv7E-M) or byte loads (Armv6-M), so their alignment does not
//!   matter;
//! - every register the block writes is declared as an output or clobber, except the FPU
//!   registers, which the block saves and restores itself (`VPUSH`/`VPOP`: `s`-register
//!   operands need a double-precision FPU in `asm!`, which a Cortex-M4F does not have); the
//!   flags are clobbered, which `asm!` assumes unless told otherwise.
//!
//! The accumulation is exact integer arithmetic modulo 2^32 (int8) and the same sequence of
//! rounded multiplies and adds per row as the portable kernel (f32), so the results are
//! bit-identical to [`super::portable`]; the on-target self-check of `kernel-bench/` compares
//! them byte for byte.
#[cfg(kinglet_kernel = "dsp")]
pub mod m4;

#[cfg(kinglet_kernel = "m0")]
pub mod m0;
