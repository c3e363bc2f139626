//! Target 3: ONNX import of arbitrary bytes; an accepted model is packed (f32 and int8) and run.
#![no_main]
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    if let Ok(model) = kinglet_converter::import::onnx::import_onnx(data) {
        kinglet_fuzz::convert::pack_and_run(&model, data);
    }
});
