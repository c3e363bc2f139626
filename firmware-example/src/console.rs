//! Console output and exit through semihosting (the debugger, here QEMU, does the I/O).
use cortex_m_semihosting::debug;

/// Prints one line (the text plus `'\n'`) in a single semihosting call, so lines of concurrent
/// writers can't interleave and output stays fast under QEMU.
pub fn line(text: &str) {
    cortex_m_semihosting::hprintln!("{}", text);
}

/// Ends the program: exit code 0 if `ok`, 1 otherwise.
pub fn exit(ok: bool) -> ! {
    debug::exit(if ok {
        debug::EXIT_SUCCESS
    } else {
        debug::EXIT_FAILURE
    });
    // Without a debugger attached the exit call returns; park the core.
    loop {
        cortex_m::asm::wfi();
    }
}

/// A fixed-capacity line buffer (`heapless::String`) for formatting without allocation.
pub type LineBuf = heapless::String<256>;
