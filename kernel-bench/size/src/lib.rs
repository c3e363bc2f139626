//! The skeleton every code-size probe shares: a blob the optimiser cannot see into, a 64-byte
//! scratch buffer, four `u8` features, and an exit through semihosting. `size_base` runs it without the
//! runtime; the difference of a probe's `.text` and `size_base`'s is the runtime's code for
//! what that probe calls. `scripts/kernel-bench.sh` builds the crate with and without the `f32`
//! feature (the runtime with f32 models, and int8-only).
//!
//! Register allocation in the probes' `main` moves their size by tens of bytes: keeping the
//! blob alive after the call, as the baseline must, made the M4 `infer` probe 76 bytes larger.
//! So the skeleton keeps only the scratch buffer and the features alive, and `size_base` the blob too.
#![no_std]

use cortex_m_semihosting::debug;

#[panic_handler]
fn panic(_: &core::panic::PanicInfo<'_>) -> ! {
    debug::exit(debug::EXIT_FAILURE);
    loop {}
}

/// `probe!(|blob, features, scratch buffer| { body })`: the `main` of a probe. `blob: &[u8]`,
/// `features: [u8; 4]`, `scratch buffer: [u8; 64]` are in scope for `body`; the scratch buffer and the features
/// are kept alive after it, and the probe exits.
#[macro_export]
macro_rules! probe {
    (|$blob:ident, $features:ident, $scratch:ident| { $($body:tt)* }) => {
        #[cortex_m_rt::entry]
        fn main() -> ! {
            use core::hint::black_box;
            // The blob the probe parses (its contents hidden from the optimiser).
            static BLOB: [u8; 4] = [0; 4];
            let $blob: &[u8] = black_box(&BLOB);
            #[allow(unused_mut)]
            let mut $scratch = [0u8; 64];
            let $features = [0u8; 4];
            $($body)*
            black_box((&mut $scratch, &$features));
            cortex_m_semihosting::debug::exit(cortex_m_semihosting::debug::EXIT_SUCCESS);
            loop {}
        }
    };
}
