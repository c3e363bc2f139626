//! Fault and panic handlers: print, then exit with failure through semihosting.
use cortex_m_rt::{exception, ExceptionFrame};

#[exception]
unsafe fn HardFault(frame: &ExceptionFrame) -> ! {
    cortex_m_semihosting::hprintln!(
        "HARDFAULT pc={:#010x} lr={:#010x} xpsr={:#010x}",
        frame.pc(),
        frame.lr(),
        frame.xpsr()
    );
    crate::console::exit(false)
}

#[exception]
unsafe fn DefaultHandler(irqn: i16) {
    cortex_m_semihosting::hprintln!("UNEXPECTED EXCEPTION irqn={}", irqn);
    crate::console::exit(false)
}

#[panic_handler]
fn panic(info: &core::panic::PanicInfo<'_>) -> ! {
    cortex_m_semihosting::hprintln!("PANIC {}", info);
    crate::console::exit(false)
}
