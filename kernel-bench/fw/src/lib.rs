//! Shared parts of the benchmark firmware: markers the QEMU plugin counts between, the naive
//! baseline kernels, a seeded generator, stack painting and the embedded blobs.
#![no_std]

pub mod blobs;
pub mod counted;
pub mod marker;
pub mod naive;
pub mod rng;
pub mod selfcheck;
pub mod stack;
