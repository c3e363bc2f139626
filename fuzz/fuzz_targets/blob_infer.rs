//! Target 1: arbitrary bytes as a blob, run with arbitrary inputs, scratch buffer and score sizes.
//!
//! Input layout: `flags, scratch_lo, scratch_hi, kind, scores, count, vlen_lo, vlen_hi`, then
//! `vlen` bytes of input values, then the blob. Flag bit 0 reseals the header (magic, flags,
//! total length and CRC made right, version and scratch field kept, so byte mutations reach the
//! layer table), bit 1 uses the model's own scratch size, bit 2 its own score count, bit 3 runs
//! the extreme inputs too, bit 4 renders the `kinglet inspect` report. `count` 0 means the
//! model's input width; the value bytes are repeated to fill the input.
#![no_main]
use kinglet_fuzz::oracle;
use kinglet_runtime::Model;
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    if data.len() < 8 {
        let _ = Model::parse(data);
        return;
    }
    let (head, rest) = data.split_at(8);
    let flags = head[0];
    let vlen = usize::from(u16::from_le_bytes([head[6], head[7]])).min(rest.len());
    let (values, blob) = rest.split_at(vlen);
    let mut blob = blob.to_vec();
    if flags & 1 != 0 {
        // The version stays: it must be the one the table needs, which only the reader knows.
        let at = kinglet_runtime::unstable::wire::header::offset::VERSION;
        let version = blob
            .get(at..at + 2)
            .map_or(0, |v| u16::from_le_bytes([v[0], v[1]]));
        let scratch = kinglet_runtime::scratch_bytes(&blob) as u32;
        // Shorter than a header: left as it is.
        let _ = kinglet_builder::seal(&mut blob, version, scratch);
    }
    let Ok(model) = Model::parse(&blob) else {
        return;
    };
    // Everything the header promises agrees with the parsed model.
    assert_eq!(kinglet_runtime::scratch_bytes(&blob), model.scratch_bytes());
    assert_eq!(kinglet_runtime::blob_len(&blob), blob.len());
    // So do the widths the `const fn`s read by walking the layer table.
    assert_eq!(kinglet_runtime::input_len(&blob), model.input_len());
    assert_eq!(kinglet_runtime::output_len(&blob), model.output_len());
    // `kinglet inspect` reports on any blob the reader accepts (table and JSON).
    if flags & 16 != 0 {
        let report = kinglet_converter::report::BlobReport::of(&model);
        assert!(!kinglet_converter::report::table::render(&report).is_empty());
        assert!(serde_json::to_string(&report).is_ok());
    }
    let scratch = if flags & 2 != 0 {
        model.scratch_bytes()
    } else {
        usize::from(u16::from_le_bytes([head[1], head[2]]))
    };
    let scores = if flags & 4 != 0 {
        model.output_len()
    } else {
        usize::from(head[4])
    };
    let count = match head[5] {
        0 => model.input_len(),
        c => usize::from(c),
    };
    oracle::run_from_bytes(&model, head[3], count, values, scratch, scores);
    if flags & 8 != 0 {
        oracle::run_extremes(&model);
    }
});
