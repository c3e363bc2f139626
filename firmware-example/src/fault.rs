//! Fault and panic handlers: print (through [`crate::console`]), then exit with failure.
use crate::console;
use core::fmt::Write;
use cortex_m_rt::{exception, ExceptionFrame};

#[exception]
unsafe fn HardFault(frame: &ExceptionFrame) -> ! {
    let mut l = console::LineBuf::new();
    let _ = write!(
        l,
        "HARDFAULT pc={:#010x} lr={:#010x} xpsr={:#010x}",
        frame.pc(),
        frame.lr(),
        frame.xpsr()
    );
    console::line(&l);
    console::exit(false)
}

#[exception]
unsafe fn DefaultHandler(irqn: i16) {
    let mut l = console::LineBuf::new();
    let _ = write!(l, "UNEXPECTED EXCEPTION irqn={irqn}");
    console::line(&l);
    console::exit(false)
}

#[panic_handler]
fn panic(info: &core::panic::PanicInfo<'_>) -> ! {
    let mut l = console::LineBuf::new();
    // A message longer than the buffer is cut; the location comes first so it survives.
    if let Some(loc) = info.location() {
        let _ = write!(l, "PANIC at {}:{}: ", loc.file(), loc.line());
    } else {
        let _ = write!(l, "PANIC ");
    }
    let _ = write!(l, "{}", info.message());
    console::line(&l);
    console::exit(false)
}
