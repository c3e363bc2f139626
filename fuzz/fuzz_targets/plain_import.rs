//! Target 4: the plain JSON model description. `.npy` references resolve against a directory
//! holding a few small arrays (`w.npy` 4×3 float32, `b.npy` 3 float64, `i.npy` int8 2×2,
//! `bad.npy` a truncated file), so the fuzzer can reach the npy branch by name.
#![no_main]
use libfuzzer_sys::fuzz_target;
use std::path::PathBuf;
use std::sync::OnceLock;

fn npy(descr: &str, shape: &str, payload: &[u8]) -> Vec<u8> {
    let mut header = format!("{{'descr': '{descr}', 'fortran_order': False, 'shape': {shape}, }}");
    while (10 + header.len() + 1) % 64 != 0 {
        header.push(' ');
    }
    header.push('\n');
    let mut v = b"\x93NUMPY\x01\x00".to_vec();
    v.extend_from_slice(&(header.len() as u16).to_le_bytes());
    v.extend_from_slice(header.as_bytes());
    v.extend_from_slice(payload);
    v
}

fn dir() -> &'static PathBuf {
    static DIR: OnceLock<PathBuf> = OnceLock::new();
    DIR.get_or_init(|| {
        let d = tempfile::tempdir()
            .map(|t| t.keep())
            .unwrap_or_else(|_| std::env::temp_dir());
        let w: Vec<u8> = (0..12)
            .flat_map(|i| (i as f32 * 0.25 - 1.0).to_le_bytes())
            .collect();
        let b: Vec<u8> = [0.5f64, -0.5, 0.0]
            .iter()
            .flat_map(|x| x.to_le_bytes())
            .collect();
        let _ = std::fs::write(d.join("w.npy"), npy("<f4", "(4, 3)", &w));
        let _ = std::fs::write(d.join("b.npy"), npy("<f8", "(3,)", &b));
        let _ = std::fs::write(d.join("i.npy"), npy("|i1", "(2, 2)", &[1, 2, 0xff, 0x80]));
        let _ = std::fs::write(d.join("bad.npy"), &npy("<f4", "(4, 3)", &w)[..70]);
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
