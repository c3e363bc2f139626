//! Batched forward passes on the host: many rows at once through a model's layers as matrix
//! products, with the runtime's own per-element steps (input scaling and quantisation,
//! requantisation, softmax, argmax) around them.
//!
//! - [`layers`] reads each layer of a validated blob into plain matrices;
//! - [`int8`] runs an int8 blob: its results are the runtime's bit for bit (every tensor,
//!   score and class), because the integer dot products are computed exactly (see there):
//!   by `vnni`, an AVX-512 VNNI kernel chosen at run time (the crate's one module with
//!   `unsafe`), or else by an f32/f64 matrix product whose partial sums are exact integers;
//! - [`float`] runs an f32 blob through a matrix-multiplication crate: it sums each dot
//!   product in another order than the runtime's kernels, and may fold an offset-free input
//!   scale into the first layer's weights, so its values may differ from the runtime's in the
//!   last bits (see there for the bound);
//! - `product` is the matrix product both use (`faer`), `input` the int8 input stage in
//!   loops that vectorise, `softmax` the runtime's softmax over a whole batch (libm's `expf`
//!   without branches, bit for bit).
//!
//! Speed (`converter/benches/vet.rs`, `BENCHMARKS.md`): each pass runs inside `vectorised`,
//! so that its per-element loops are compiled for AVX-512 or AVX2 where the host has them; the
//! int8 pass writes its first product's input (unsigned bytes for the VNNI kernel, f32 for the
//! portable product) while quantising, keeps each layer's weights in the product's form from
//! [`Int8Host::new`] on, and reuses one thread's buffers from batch to batch; the f32 pass
//! run by `vet` ([`FloatHost::run_lean`]) does not write a scaled copy of the rows where the
//! scale can be folded.
//!
//! `kinglet vet` uses these by default; its `--per-row` flag runs every row through
//! [`kinglet_runtime::Model::infer_traced`] instead.
pub mod float;
mod input;
pub mod int8;
pub mod layers;
mod product;
mod softmax;
#[cfg(target_arch = "x86_64")]
mod vnni;

pub use float::{FloatBatch, FloatHost};
pub use int8::{Int8Batch, Int8Host};

/// Runs `op` compiled for the best vector instruction set the host has (AVX-512, AVX2 or the
/// baseline), chosen at run time by `pulp`, so that the per-element loops of the passes
/// vectorise as wide as the machine allows (the crate is built for the baseline x86-64 target,
/// SSE2). `op`'s `with_simd` and what it calls must be `#[inline(always)]` for that.
#[inline(always)]
fn vectorised<Op: pulp::WithSimd>(op: Op) -> Op::Output {
    pulp::Arch::new().dispatch(op)
}
