//! Target 2: structure-aware. Starts from a valid model (a real packed blob or a synthetic one),
//! applies field-by-field mutations (shapes, tensor lengths, scales, zero points, shifts,
//! multipliers, biases at the accumulator bound, labels, ...), re-encodes with a correct length
//! and CRC, and checks that the reader's verdict is sound: a table it accepts runs every
//! extreme and fuzzed input without panicking, with finite scores (probabilities for softmax
//! and sigmoid), and round-trips through the validating encoder byte for byte.
#![no_main]
use arbitrary::Unstructured;
use kinglet_fuzz::{base, mutate, oracle, BASES};
use kinglet_runtime::unstable::encode::{encode, max_encoded_len};
use kinglet_runtime::Model;
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let mut u = Unstructured::new(data);
    let Ok(which) = u.choose_index(BASES) else {
        return;
    };
    let mut m = base(which);
    let Ok(steps) = u.int_in_range(0..=12u8) else {
        return;
    };
    for _ in 0..steps {
        if mutate::mutate_once(&mut m, &mut u).is_err() {
            break;
        }
    }
    // Keep each run fast: big tables add nothing the small ones do not reach.
    let bytes: usize = m.layers.iter().map(|l| l.weights.len()).sum();
    if bytes > 1 << 16 {
        return;
    }
    if std::env::var_os("KINGLET_FUZZ_DEBUG").is_some() {
        eprintln!("{m:#?}");
    }
    let desc = m.as_desc();
    let planned = m.planned_scratch();
    let scratch_field = match u.int_in_range(0..=15u8).unwrap_or(0) {
        0 => planned.wrapping_add(1),
        1 => planned.saturating_sub(1),
        _ => planned,
    };
    let blob = kinglet_builder::raw_blob(&desc, scratch_field);
    let verdict = Model::parse(&blob);
    // The validating encoder agrees with the reader.
    let mut out = vec![0u8; max_encoded_len(&desc).max(blob.len())];
    let enc = encode(&desc, &mut out);
    match (&verdict, &enc) {
        // Same scratch field and table; the header's version (the encoder writes the lowest
        // that holds the blob) and so the CRC may differ.
        (Ok(_), Ok(n)) => assert_eq!(&out[16..*n], &blob[16..], "encoder and raw writer differ"),
        (Err(kinglet_runtime::FormatError::ScratchMismatch { .. }), Ok(_)) => {}
        (Err(e), Ok(_)) => panic!("reader rejects ({e:?}) what the encoder writes"),
        (Ok(_), Err(e)) => panic!("encoder refuses ({e:?}) what the reader accepts"),
        (Err(_), Err(_)) => {}
    }
    let Ok(model) = verdict else {
        return;
    };
    oracle::run_extremes(&model);
    let n = model.input_len();
    let kind = u.int_in_range(0..=2u8).unwrap_or(0);
    let rest = u.take_rest();
    let (a, s) = (model.scratch_bytes(), model.output_len());
    oracle::run_from_bytes(&model, kind, n, rest, a, s);
});
