//! Dense (fully connected) kernels: `y = act(W x + b)` for int8 and f32.
//!
//! [`portable`] holds plain-Rust kernels for every weight layout; they are always compiled and
//! are the reference. On Cortex-M the entry points here pick a faster kernel for
//! [`WeightLayout::Blocked4x4`](crate::wire::format::WeightLayout::Blocked4x4) weights, chosen when
//! the runtime is compiled (the runtime's build script maps the compilation target to a kernel,
//! because ARM target features are not visible to `cfg` on stable Rust):
//!
//! | target | int8 | f32 |
//! |---|---|---|
//! | `thumbv7em-*` (Cortex-M4/M7) | `asm::m4`: `SMLAD` on `SXTB16`/`UXTB16`-unpacked pairs, 4 rows per pass | `eabihf`: `asm::m4` `VLDM`/`VMLA` (not fused); else [`m0`] (one block at a time, small) |
//! | `thumbv6m-*`, `thumbv7m-*`, `thumbv8m.base-*` (Cortex-M0/M0+/M3/M23) | `asm::m0`: unrolled byte loads and `MULS`, accumulators in high registers, 4 rows per pass | [`m0`] (one block at a time, small) |
//! | anything else | portable | portable |
//!
//! int4 weights ([`WeightLayout::Nibble4x4`](crate::wire::format::WeightLayout::Nibble4x4),
//! [`int4`]) take [`dense_i4_auto`]: `asm::m4` or `asm::m0` on the same targets as int8,
//! [`int4::dense_i4_portable`] elsewhere.
//!
//! The first layer of a model with an int16 input tensor (format version 7) takes [`wide`]:
//! plain Rust on every target.
//!
//! All `asm!` lives in `asm` (only compiled for those targets). [`m0`] is the same Armv6-M
//! kernel shape in plain safe Rust, compiled everywhere, so the host tests run it and the
//! shared block loop (`fixed::blocks_i8`) too.
//! Setting `KINGLET_KERNEL=portable` when building forces the portable kernels. Every kernel
//! gives bit-identical outputs to the portable one (`runtime/tests/kernels_prop.rs` on the host,
//! and the on-target self-check of `kernel-bench/`). The fast kernels of
//! `asm::m4` need the weight data 4-byte aligned; the packer aligns it within the blob, so a blob
//! placed at a 4-byte aligned address gets them, and any other falls back to a slower kernel
//! with the same results.
mod blocked_f32;
pub mod fixed;
pub mod int4;
pub mod portable;
#[cfg(feature = "int16-input")]
pub mod wide;

/// The `asm!` kernels; the crate's only module where `unsafe` is allowed.
#[cfg(any(kinglet_kernel = "dsp", kinglet_kernel = "m0"))]
#[allow(unsafe_code)]
pub mod asm;

pub mod m0;

pub use portable::{dense_f32, dense_i8};

/// Consecutive `size`-byte pieces of `data` (a shorter rest is dropped), as `chunks_exact`
/// gives, but without the division `chunks_exact` makes for its length: a Cortex-M0 has no
/// divide instruction, and that one division links 400 bytes of `__aeabi_uidivmod` into an
/// int8 firmware that needs no other. `size` 0 gives empty pieces forever; callers zip it.
pub(crate) fn pieces(data: &[u8], size: usize) -> impl Iterator<Item = &[u8]> {
    let mut rest = data;
    core::iter::from_fn(move || {
        let (piece, tail) = rest.split_at_checked(size)?;
        rest = tail;
        Some(piece)
    })
}

/// Parameters of one int8 dense layer, borrowed from the blob.
#[derive(Debug, Clone, Copy)]
pub struct DenseI8<'a> {
    /// Input width.
    pub inputs: usize,
    /// The weight field in the layer's layout (for [`dense_i8`], `[outputs][inputs]` int8).
    pub weights: &'a [u8],
    /// `outputs` little-endian i32 biases (input zero point folded in).
    pub bias: &'a [u8],
    /// `outputs` little-endian i32 fixed-point multipliers.
    pub multiplier: &'a [u8],
    /// `outputs` signed shifts.
    pub shift: &'a [u8],
    /// Output zero point.
    pub zero_point: i8,
    /// Lower clamp (the zero point for a fused ReLU).
    pub act_min: i8,
    /// Upper clamp.
    pub act_max: i8,
    /// A pointwise activation's 256-entry table (`FORMAT.md` §3.3), applied as each requantised
    /// value is stored: `table[q + 128]` instead of `q` (the clamp is then the full int8 range).
    pub table: Option<&'a [u8; crate::unstable::pointwise::TABLE_LEN]>,
}

/// The byte an int8 kernel stores for the requantised value `q`: `q` itself, or its entry of the
/// layer's pointwise table (`q + 128` as an index is `q`'s byte with the top bit flipped).
#[inline(always)]
pub(crate) fn store_i8(table: Option<&[u8; crate::unstable::pointwise::TABLE_LEN]>, q: i8) -> u8 {
    let b = q as u8;
    match table {
        Some(t) => t.get(usize::from(b ^ 0x80)).copied().unwrap_or(b),
        None => b,
    }
}

/// Name of the int8 kernel [`dense_i8_blocked_auto`] uses on this build.
pub const KERNEL: &str = if cfg!(kinglet_kernel = "dsp") {
    "dsp"
} else if cfg!(kinglet_kernel = "m0") {
    "m0"
} else {
    "portable"
};

/// Runs an int8 dense layer with `Blocked4x4` weights on the fastest kernel of this build;
/// `output.len()` is the layer's output width.
#[inline]
pub fn dense_i8_blocked_auto(p: &DenseI8<'_>, input: &[u8], output: &mut [u8]) {
    #[cfg(kinglet_kernel = "dsp")]
    return asm::m4::dense_i8_blocked_m4_asm(p, input, output);
    #[cfg(kinglet_kernel = "m0")]
    return asm::m0::dense_i8_blocked_m0_asm(p, input, output);
    #[allow(unreachable_code)]
    portable::dense_i8_blocked_portable(p, input, output)
}

/// Runs an int8 dense layer with int4 `Nibble4x4` weights (`FORMAT.md` §3.5) on the fastest
/// kernel of this build (the int8 kernel's name, [`KERNEL`], names it too); `output.len()` is
/// the layer's output width.
#[inline]
pub fn dense_i4_auto(p: &DenseI8<'_>, input: &[u8], output: &mut [u8]) {
    #[cfg(kinglet_kernel = "dsp")]
    return asm::m4::dense_i4_m4_asm(p, input, output);
    #[cfg(kinglet_kernel = "m0")]
    return asm::m0::dense_i4_m0_asm(p, input, output);
    #[allow(unreachable_code)]
    int4::dense_i4_portable(p, input, output)
}

/// Parameters of one f32 dense layer, borrowed from the blob.
#[derive(Debug, Clone, Copy)]
pub struct DenseF32<'a> {
    /// Input width.
    pub inputs: usize,
    /// The weight field in the layer's layout, little-endian f32 (for [`dense_f32`],
    /// `[outputs][inputs]`).
    pub weights: &'a [u8],
    /// `outputs` little-endian f32 biases.
    pub bias: &'a [u8],
    /// Clamp negative outputs to 0 (a fused ReLU).
    pub relu: bool,
}

/// Runs an f32 dense layer with `Blocked4x4` weights on the fastest kernel of this build;
/// `output.len() / 4` is the layer's output width.
#[inline]
pub fn dense_f32_blocked_auto(p: &DenseF32<'_>, input: &[u8], output: &mut [u8]) {
    #[cfg(all(kinglet_kernel = "dsp", kinglet_fpu))]
    return asm::m4::dense_f32_blocked_m4_asm(p, input, output);
    // Soft-float targets: the one-block kernel, for flash.
    #[cfg(all(any(kinglet_kernel = "dsp", kinglet_kernel = "m0"), not(kinglet_fpu)))]
    return m0::dense_f32_blocked_m0_rust(p, input, output);
    #[allow(unreachable_code)]
    portable::dense_f32_blocked_portable(p, input, output)
}
