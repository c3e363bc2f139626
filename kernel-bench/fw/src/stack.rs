//! Peak stack of a call, the one rule behind every published stack figure (BENCHMARKS.md,
//! `converter/src/fit/measured.rs`).
//!
//! [`measure`] reads the stack pointer, paints every word from [`WINDOW`] bytes below it (or
//! from the bottom of the stack region, `_stack_end` in cortex-m-rt's `link.x`) up to it, runs
//! the call between the two section markers ([`crate::marker`]), and scans up from the bottom
//! for the first word that lost the pattern. The painted depth is the distance from there to
//! the stack pointer it read.
//!
//! Painting sees only words that were written. A frame that is reserved (`sub sp, #n`) but
//! whose lowest words are never stored to is deeper than the paint shows, and an interrupt
//! taken at that point would push its frame there. So the harness (`kernel-bench/harness`)
//! also runs this firmware under QEMU with a register trace and takes the lowest stack pointer
//! between the markers; it publishes the deeper of the two. [`Used::sp`] is the reference both
//! are measured from, and the trace checks that it is the stack pointer at the start marker.
//!
//! The paint loop is inlined here: no call sits between reading the stack pointer and
//! painting, so nothing live lies below the stack pointer being painted.
use crate::marker;

/// The pattern painted into unused stack.
pub const PAINT: u32 = 0xA5C3_5A3C;

/// At most this many bytes below the stack pointer are painted: more than any call measured
/// needs (a call that reaches the last painted word panics), and few enough that the
/// Cortex-M4 machine's 256 KiB of RAM do not make every measurement paint and scan it all.
pub const WINDOW: usize = 12 * 1024;

extern "C" {
    static mut _stack_end: u32;
}

/// What one measurement found.
#[derive(Clone, Copy, Debug)]
pub struct Used {
    /// Bytes from `sp` down to the lowest word the call changed (one-word granularity; a call
    /// that stores the pattern value itself at its deepest word is under-reported by it).
    pub painted: usize,
    /// The stack pointer at the call: the reference of both depths.
    pub sp: usize,
}

/// Runs `f` between the section markers and returns its result with what the paint found.
#[inline(never)]
pub fn measure<R>(f: impl FnOnce() -> R) -> (R, Used) {
    let sp = cortex_m::register::msp::read() as usize;
    // Only the address of the linker symbol (the bottom of the stack region) is taken.
    let end = core::ptr::addr_of_mut!(_stack_end);
    let words = sp.saturating_sub(end as usize).min(WINDOW) / 4;
    let bottom = (sp - words * 4) as *mut u32;
    for i in 0..words {
        // SAFETY: `bottom + i` for `i < words` lies in the stack region below the current stack
        // pointer: memory no live frame uses. Volatile so the stores are not elided.
        unsafe { bottom.add(i).write_volatile(PAINT) };
    }
    marker::start();
    let r = call(f);
    marker::stop();
    let mut untouched = 0;
    // SAFETY: same region, read only.
    while untouched < words && unsafe { bottom.add(untouched).read_volatile() } == PAINT {
        untouched += 1;
    }
    assert!(
        untouched > 0,
        "the call used all {} painted bytes",
        words * 4
    );
    let painted = (words - untouched) * 4;
    (r, Used { painted, sp })
}

/// Calls `f` from a frame of its own, below the stack pointer [`measure`] read: were `f`
/// inlined into `measure`, its locals would sit in `measure`'s frame, above that stack pointer,
/// and would not be counted.
#[inline(never)]
fn call<R>(f: impl FnOnce() -> R) -> R {
    f()
}
