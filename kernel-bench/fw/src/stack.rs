//! Peak stack of a call by painting: fill the free stack below the stack pointer with a
//! pattern, run the call, find the lowest word that changed.
const PAINT: u32 = 0xA5C3_5A3C;

extern "C" {
    static mut _stack_end: u32;
}

/// Runs `f` and returns the peak stack bytes it used (one-word granularity).
#[inline(never)]
pub fn measure(f: impl FnOnce()) -> usize {
    let sp = cortex_m::register::msp::read() as usize;
    // Only the address of the linker symbol (the bottom of the stack region) is taken.
    let bottom = core::ptr::addr_of_mut!(_stack_end);
    // Leave 64 bytes below the stack pointer for this function's own calls to the paint loop.
    let words = sp.saturating_sub(bottom as usize + 64) / 4;
    for i in 0..words {
        // SAFETY: below the stack pointer, above the stack's end: memory no live frame uses.
        unsafe { bottom.add(i).write_volatile(PAINT) };
    }
    f();
    let mut untouched = 0;
    // SAFETY: same region, read only.
    while untouched < words && unsafe { bottom.add(untouched).read_volatile() } == PAINT {
        untouched += 1;
    }
    sp - (bottom as usize + untouched * 4)
}
