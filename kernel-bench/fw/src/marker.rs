//! Section markers: `mov r11, r11` starts a counted section, `mov r10, r10` ends it. Both are
//! no-ops the compiler never emits; `kernel-bench/plugin/kcount.c` counts the guest
//! instructions executed strictly between them.
use core::arch::asm;

/// Starts a counted section.
#[inline(always)]
pub fn start() {
    // SAFETY: a register move onto itself: no effect. Not `nomem`, so it is also a compiler
    // barrier: no memory access moves across it.
    unsafe { asm!("mov r11, r11", options(nostack, preserves_flags)) }
}

/// Ends a counted section.
#[inline(always)]
pub fn stop() {
    // SAFETY: as for `start`.
    unsafe { asm!("mov r10, r10", options(nostack, preserves_flags)) }
}
