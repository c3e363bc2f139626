//! Runtime footprint measured on the example firmware (generated; do not edit by hand).
//!
//! Reproduce: `bash scripts/firmware.sh --write-measured` (rustc 1.95.0,
//! release profile of `firmware-example/`: opt-level "s", fat LTO, one codegen unit).
//! Code: `.text` and `.rodata` of the `size_runtime` firmware (parse + one inference per
//! input path) minus those of `size_base` (same start-up and console, no runtime), with the
//! embedded blob taken out of `.rodata`. Stack: peak bytes found by painting the stack below
//! the stack pointer and scanning after the call (`firmware-example/src/stack.rs`), under
//! QEMU; `stack_infer` is the largest of the measured inferences (digits int8 through the
//! u8/i16/f32 paths, the f32 digits model).
use super::Measured;

/// Cortex-M0 / M0+ (`thumbv6m-none-eabi`, no FPU: float is software).
pub const CORTEX_M0: Measured = Measured {
    target: "thumbv6m-none-eabi",
    runtime_text: 14592,
    runtime_rodata: 1383,
    stack_parse: 2924,
    stack_infer: 596,
    model_struct: 560,
};

/// Cortex-M4F / M7 class (`thumbv7em-none-eabihf`, single-precision FPU).
pub const CORTEX_M4F: Measured = Measured {
    target: "thumbv7em-none-eabihf",
    runtime_text: 11584,
    runtime_rodata: 1383,
    stack_parse: 2868,
    stack_infer: 532,
    model_struct: 560,
};
