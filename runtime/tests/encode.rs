//! The encoder (`kinglet_runtime::unstable::encode`, feature `encode`, which the `kinglet-builder`
//! dev-dependency turns on): the pinned bytes of `FORMAT.md` §7, and that it refuses what the
//! reader would.
use kinglet_builder::sample::tiny_int8;
use kinglet_runtime::unstable::encode::{encode, EncodeError};
use kinglet_runtime::{FormatError, Model};

#[cfg(feature = "f32")]
fn hex(b: &[u8]) -> String {
    b.iter().map(|x| format!("{x:02x}")).collect()
}

/// Pins the version-1 encoding byte for byte (FORMAT.md §7 walks through these bytes).
/// A change here is a format change: bump `FORMAT_VERSION` and keep the old blob readable
/// or rejected on purpose.
#[test]
#[cfg(feature = "f32")]
fn expected_bytes_of_the_small_f32_model() {
    let owned = kinglet_builder::sample::tiny_f32();
    let d = owned.as_desc();
    let mut out = vec![0u8; kinglet_runtime::unstable::encode::max_encoded_len(&d)];
    let n = encode(&d, &mut out).unwrap();
    let blob = &out[..n];
    let expected = concat!(
        "4b474c54",
        "0100",
        "0000",
        "5d000000",
        "899e3246",
        "14000000", // header
        "02",
        "01",
        "00",
        "00",
        "02", // input_len, F32, no scaler, no input quant, 2 layers
        "02",
        "03",
        "01",
        "00", // 2 → 3, Relu, output-major
        "18",
        "0000803f000080bf0000003f0000003f000000c00000803f", // 24 weight bytes
        "0c",
        "00000000cdcccc3dcdcc4c3e",
        "00", // 12 bias bytes, no quant
        "03",
        "01",
        "00",
        "00",
        "0c",
        "0000803f00000040000080bf",
        "04",
        "000000bf",
        "00",
        "02",
        "00", // Sigmoid, no labels
    );
    assert_eq!(hex(blob), expected);
    let m = Model::parse(blob).unwrap();
    assert_eq!(m.desc(), &d);
}

#[test]
fn round_trips_int8_and_refuses_what_the_reader_would() {
    let owned = tiny_int8();
    let blob = owned.encode_to_vec().unwrap();
    assert_eq!(Model::parse(&blob).unwrap().desc(), &owned.as_desc());
    let mut bad = tiny_int8();
    bad.layers[1].inputs = 3;
    let mut out = vec![0u8; 1024];
    assert!(matches!(
        encode(&bad.as_desc(), &mut out),
        Err(EncodeError::Invalid(FormatError::ShapeMismatch {
            layer: 1
        }))
    ));
    assert_eq!(
        encode(&owned.as_desc(), &mut out[..40]),
        Err(EncodeError::BufferTooSmall)
    );
    assert_eq!(
        encode(&owned.as_desc(), &mut out[..10]),
        Err(EncodeError::BufferTooSmall)
    );
}

#[test]
fn reseal_makes_length_and_checksum_right_and_nothing_else() {
    use kinglet_runtime::unstable::encode::reseal;
    let blob = tiny_int8().encode_to_vec().unwrap();
    let mut longer = blob.clone();
    longer.push(0);
    reseal(&mut longer).unwrap();
    // The length and CRC now match, so the reader gets as far as the layer table.
    assert_eq!(
        Model::parse(&longer).map(|_| ()),
        Err(FormatError::TrailingBytes)
    );
    longer.pop();
    reseal(&mut longer).unwrap();
    assert_eq!(longer, blob);
    assert_eq!(
        reseal(&mut [0u8; kinglet_runtime::HEADER_LEN - 1]),
        Err(EncodeError::BufferTooSmall)
    );
}
