//! Peak stack use of a call, measured by painting.
//!
//! [`measure`] reads the stack pointer, fills every word between the bottom of the stack region
//! (`_stack_end`, the end of `.bss`/`.uninit` in cortex-m-rt's `link.x`) and the stack pointer
//! with a pattern, runs the call, and scans upward from the bottom for the first word that no
//! longer holds the pattern. The distance from there to the stack pointer at the call is the
//! peak stack the call used (its own frames, everything it called, and any exception taken
//! meanwhile — none here, no interrupt is enabled). Granularity is one word; a call that happens
//! to store the pattern value itself at its deepest point would be under-reported by that word.
//!
//! The paint loop is inlined into [`measure`] itself: no function call sits between reading
//! the stack pointer and painting, so nothing live lies below the stack pointer being painted.

/// The pattern painted into unused stack.
pub const PAINT: u32 = 0xC0DE_5AA5;

extern "C" {
    static mut _stack_end: u32;
}

/// Bottom of the stack region (lowest address the stack may grow down to).
fn stack_bottom() -> *mut u32 {
    // Only the address of the linker symbol is taken (safe since Rust 1.82), never its value.
    core::ptr::addr_of_mut!(_stack_end)
}

/// Runs `f` and returns its result with the peak stack bytes it used.
#[inline(never)]
pub fn measure<R>(f: impl FnOnce() -> R) -> (R, usize) {
    let sp = cortex_m::register::msp::read() as usize;
    let bottom = stack_bottom();
    let words = sp.saturating_sub(bottom as usize) / 4;
    for i in 0..words {
        // SAFETY: `bottom + i` for `i < words` lies in the stack region below the current stack
        // pointer: memory no live frame uses, owned by nobody but the stack. Volatile so the
        // stores are not elided.
        unsafe { bottom.add(i).write_volatile(PAINT) };
    }
    let r = call(f);
    let mut untouched = 0;
    while untouched < words {
        // SAFETY: same region as above, read only.
        if unsafe { bottom.add(untouched).read_volatile() } != PAINT {
            break;
        }
        untouched += 1;
    }
    (r, (words - untouched) * 4)
}

/// Calls `f` from a frame of its own, below the stack pointer [`measure`] read: were `f`
/// inlined into `measure`, its locals would sit in `measure`'s frame, above that stack pointer,
/// and would not be counted.
#[inline(never)]
fn call<R>(f: impl FnOnce() -> R) -> R {
    f()
}

/// Bytes of stack available below the current stack pointer.
pub fn free_now() -> usize {
    (cortex_m::register::msp::read() as usize).saturating_sub(stack_bottom() as usize)
}
