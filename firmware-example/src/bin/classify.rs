//! The demo: classify fan-vibration windows and show the class on one output pin per class.
//!
//! Windows come from a [`WindowSource`]: first the flash replay of the 64 recorded windows
//! (`models/vibration_replay.bin`), on every build; then, on the micro:bit v2 (feature
//! `board-microbit-v2`), live windows from its LSM303AGR
//! (`kinglet_fw_sensor::lsm303::Lsm303Source`), classified until the board is stopped. For each window the firmware
//! computes the 15 features of `examples/vibration/FEATURES.md`
//! ([`kinglet_vibration_features`], in f32), runs the int8 model and drives the pins: the
//! predicted class's pin high, the others low. QEMU's machines have no LEDs the firmware could
//! drive, so there the pins are `RecordingPin`s (they only remember their level); on a board
//! they are the HAL's output pins (`kinglet_firmware_example::boards`). Their levels are
//! printed either way. With the `defmt`
//! feature each result is also logged through defmt (RTT), which needs a probe to read.
//!
//! The model is embedded with `kinglet_runtime::embed_blob!` (4-byte aligned, which the run
//! checks with `Model::weights_aligned`), and the score buffer is sized with the `const fn`
//! `kinglet_runtime::output_len`. The scratch buffer: a `static` byte array of exactly
//! `kinglet_runtime::scratch_bytes(VIBRATION)` bytes,
//! handed out once by `cortex_m::singleton!`. That keeps it in `.bss`, where the linker counts
//! it against RAM (an oversized model fails the link, not the run), needs no `static mut`, and
//! keeps it off the stack. What stack the runtime itself needs is in BENCHMARKS.md (measured by
//! `bash scripts/kernel-bench.sh`).
#![no_std]
#![no_main]

use core::fmt::Write;
use cortex_m_rt::entry;
use embedded_hal::digital::StatefulOutputPin;
use kinglet_firmware_example::{board, console};
use kinglet_fw_sensor::pins::show_class;
use kinglet_fw_sensor::replay::ReplaySource;
use kinglet_fw_sensor::{Window, WindowSource, AXES, WINDOW};
use kinglet_fw_vectors::assets::{REPLAY_LABELS, REPLAY_WINDOWS, VIBRATION, VIBRATION_SCRATCH};
use kinglet_runtime::{Input, Model};
use kinglet_vibration_features::window_features;

/// Scores (and pins) per window: the model's output width, read from the blob at compile time.
const CLASSES: usize = kinglet_runtime::output_len(VIBRATION);

#[entry]
fn main() -> ! {
    let ok = run();
    console::exit(ok)
}

fn fail(what: &str) -> bool {
    let mut l = console::LineBuf::new();
    let _ = write!(l, "classify: {what}");
    console::line(&l);
    false
}

fn run() -> bool {
    let Some(scratch) = cortex_m::singleton!(: [u8; VIBRATION_SCRATCH] = [0; VIBRATION_SCRATCH])
    else {
        return fail("scratch buffer already taken");
    };
    let model = match Model::parse(VIBRATION) {
        Ok(m) => m,
        Err(e) => {
            let mut l = console::LineBuf::new();
            let _ = write!(l, "classify: model rejected: {e}");
            console::line(&l);
            return false;
        }
    };
    if model.classes() != CLASSES {
        return fail("the model's classes differ from its output width");
    }
    // `embed_blob!` placed the blob at a multiple of 4: the Cortex-M4 kernels' fast path.
    if !model.weights_aligned() {
        return fail("the embedded model's weights are not 4-byte aligned");
    }
    let mut l = console::LineBuf::new();
    let _ = write!(
        l,
        "classify on {}: model {} bytes in flash, scratch buffer {} bytes, {} windows to replay",
        board::BOARD,
        model.blob_bytes(),
        scratch.len(),
        REPLAY_WINDOWS.len() / (AXES * WINDOW * 2)
    );
    console::line(&l);
    #[cfg(not(probe_board))]
    let mut pins = [kinglet_fw_sensor::pins::RecordingPin::new(); CLASSES];
    #[cfg(feature = "board-pico")]
    let Some(board) = kinglet_firmware_example::boards::pico::take() else {
        return fail("board peripherals already taken, or the clocks did not start");
    };
    #[cfg(feature = "board-microbit-v2")]
    let Some(board) = kinglet_firmware_example::boards::microbit_v2::take() else {
        return fail("board peripherals already taken");
    };
    #[cfg(probe_board)]
    let mut pins = board.class_pins;
    let mut source = ReplaySource::new(REPLAY_WINDOWS);
    let replayed = classify_all(&model, &mut source, scratch, &mut pins);
    #[cfg(feature = "board-microbit-v2")]
    if replayed {
        return match board.source {
            Ok(mut live_source) => live(&model, &mut live_source, scratch, &mut pins),
            Err(e) => {
                let mut l = console::LineBuf::new();
                let _ = write!(l, "classify: accelerometer: {e}");
                console::line(&l);
                false
            }
        };
    }
    replayed
}

/// Classifies live windows until the source fails (on success it runs until the board is
/// stopped); returns `false` when it fails.
#[cfg(feature = "board-microbit-v2")]
fn live<S: WindowSource, P: StatefulOutputPin>(
    model: &Model<'_>,
    source: &mut S,
    scratch: &mut [u8],
    pins: &mut [P; CLASSES],
) -> bool {
    let mut window: Window = [[0; WINDOW]; AXES];
    let mut scores = [0f32; CLASSES];
    let mut n = 0usize;
    loop {
        if let Err(e) = source.next_window(&mut window) {
            let mut l = console::LineBuf::new();
            let _ = write!(l, "classify: live window {n}: {e:?}");
            console::line(&l);
            return false;
        }
        let features = window_features(&window);
        let p = match model.infer(Input::F32(&features), scratch, &mut scores) {
            Ok(p) => p,
            Err(e) => {
                let mut l = console::LineBuf::new();
                let _ = write!(l, "classify: live window {n}: {e}");
                console::line(&l);
                return false;
            }
        };
        if show_class(pins, p.class).is_err() {
            return fail("could not drive the class pins");
        }
        let mut l = console::LineBuf::new();
        let _ = write!(
            l,
            "live {n}: {:<12} p={:>4}\u{2030}",
            model.label(p.class).unwrap_or("?"),
            (p.score * 1000.0) as u32
        );
        console::line(&l);
        n = n.wrapping_add(1);
    }
}

/// Classifies every window `source` yields; returns whether all went well.
fn classify_all<S: WindowSource, P: StatefulOutputPin>(
    model: &Model<'_>,
    source: &mut S,
    scratch: &mut [u8],
    pins: &mut [P; CLASSES],
) -> bool {
    let mut window: Window = [[0; WINDOW]; AXES];
    let mut scores = [0f32; CLASSES];
    let (mut n, mut agree, mut same) = (0usize, 0usize, 0usize);
    while source.next_window(&mut window).is_ok() {
        let features = window_features(&window);
        let p = match model.infer(Input::F32(&features), scratch, &mut scores) {
            Ok(p) => p,
            Err(e) => {
                let mut l = console::LineBuf::new();
                let _ = write!(l, "classify: window {n}: {e}");
                console::line(&l);
                return false;
            }
        };
        // The class alone, by the integer argmax of the last layer: must be `infer`'s.
        same += usize::from(model.classify(Input::F32(&features), scratch) == Ok(p.class));
        if show_class(pins, p.class).is_err() {
            return fail("could not drive the class pins");
        }
        let truth = REPLAY_LABELS.get(n).map(|&c| usize::from(c));
        agree += usize::from(truth == Some(p.class));
        let mut l = console::LineBuf::new();
        let _ = write!(
            l,
            "window {n:02}: {:<12} p={:>4}\u{2030} recorded={:<12} pins=",
            model.label(p.class).unwrap_or("?"),
            (p.score * 1000.0) as u32,
            truth.and_then(|c| model.label(c)).unwrap_or("?"),
        );
        for pin in pins.iter_mut() {
            let _ = l.push(if pin.is_set_high().unwrap_or(false) {
                '1'
            } else {
                '0'
            });
        }
        console::line(&l);
        #[cfg(feature = "defmt")]
        defmt::info!("window {=usize}: class {=usize}", n, p.class);
        n += 1;
    }
    let mut l = console::LineBuf::new();
    let _ = write!(
        l,
        "classify: {n} windows, {agree} agree with the recorded class; Model::classify gives infer's class on {same} of {n}"
    );
    console::line(&l);
    n > 0 && same == n
}
