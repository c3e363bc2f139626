//! Console output and exit.
//!
//! Under QEMU both go through semihosting (the debugger, here QEMU, does the I/O). On a
//! development board (a `board-*` feature) lines go out through defmt over RTT, which the
//! debug probe reads without stopping the core (semihosting output would halt it on every
//! line), and the exit is still a semihosting call, which `probe-rs run` turns into its own
//! exit code.
use cortex_m_semihosting::debug;

/// Prints one line (the text plus `'\n'`) in a single semihosting call, so lines of concurrent
/// writers can't interleave and output stays fast under QEMU.
#[cfg(not(probe_board))]
pub fn line(text: &str) {
    cortex_m_semihosting::hprintln!("{}", text);
}

/// Prints one line through defmt (RTT); the host side (`probe-rs run`) prints it as it is.
#[cfg(probe_board)]
pub fn line(text: &str) {
    defmt::println!("{=str}", text);
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
