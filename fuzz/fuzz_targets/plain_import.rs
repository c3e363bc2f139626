//! Target 4: the plain JSON model description. `.npy` references resolve against a directory
//! holding a few small arrays (`w.npy` 4×3 float32, `b.npy` 3 float64, `i.npy` int8 2×2,
//! `bad.npy` a truncated file), so the fuzzer can reach the npy branch by name.
#![no_main]
use kinglet_builder::npy::npy_bytes;
use libfuzzer_sys::fuzz_target;
use std::path::PathBuf;
use std::sync::OnceLock;

fn dir() -> &'static PathBuf {
    static DIR: OnceLock<PathBuf> = OnceLock::new();
    DIR.get_or_init(|| {
        let d = tempfile::tempdir()
            .map(|t| t.keep())
            .unwrap_or_else(|_| std::env::temp_dir());
        let w: Vec<f32> = (0..12).map(|i| i as f32 * 0.25 - 1.0).collect();
        let w = npy_bytes(&[4, 3], &w);
        let _ = std::fs::write(d.join("w.npy"), &w);
        let _ = std::fs::write(d.join("b.npy"), npy_bytes(&[3], &[0.5f64, -0.5, 0.0]));
        let _ = std::fs::write(d.join("i.npy"), npy_bytes(&[2, 2], &[1i8, 2, -1, -128]));
        // The header and 6 of the 48 data bytes.
        let _ = std::fs::write(d.join("bad.npy"), &w[..w.len() - 42]);
        d
    })
}

fuzz_target!(|data: &[u8]| {
    let Ok(text) = std::str::from_utf8(data) else {
        return;
    };
    if let Ok(model) = kinglet_converter::import::plain::import_plain_str(text, dir()) {
        kinglet_fuzz::convert::pack_and_run(&model, data);
    }
});
