//! Writing blobs (feature `encode`; still `no_std`, no allocation): the host converter's side of
//! the format. The encoder validates with the same rules as the reader, so it cannot write a
//! blob that [`crate::Model::parse`] would reject.
use crate::error::FormatError;
use crate::format::ModelDesc;
use crate::header::{version_for, Header, CHECKED_FROM, CHECKSUM, HEADER_LEN};
use crate::validate;

/// Why a blob could not be written.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[non_exhaustive]
pub enum EncodeError {
    /// The layer table breaks a format rule.
    Invalid(FormatError),
    /// The output buffer is too small (see [`max_encoded_len`]).
    BufferTooSmall,
}

impl core::fmt::Display for EncodeError {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        match self {
            EncodeError::Invalid(e) => write!(f, "invalid model: {e}"),
            EncodeError::BufferTooSmall => f.write_str("output buffer too small for the blob"),
        }
    }
}

impl core::error::Error for EncodeError {}

/// An upper bound on the encoded size of `desc`, for sizing the output buffer.
pub fn max_encoded_len(desc: &ModelDesc<'_>) -> usize {
    let mut tensors = desc.labels.len();
    if let Some(s) = &desc.scaler {
        tensors += s.offset.len() + s.scale.len();
    }
    if let Some(q) = &desc.input_quant {
        tensors += q.int_mult.len() + q.int_add.len() + q.int_shift.len();
    }
    for l in &desc.layers {
        tensors += l.weights.len() + l.bias.len();
        if let Some(q) = &l.quant {
            tensors += q.weight_scale.len() + q.multiplier.len() + q.shift.len();
        }
    }
    // Each field costs at most 10 bytes of varint/fixed encoding besides its payload.
    HEADER_LEN + tensors + 16 * 10 * (desc.layers.len() + 2)
}

/// Encodes `desc` into `out`; returns the blob's length (the used prefix of `out`).
pub fn encode(desc: &ModelDesc<'_>, out: &mut [u8]) -> Result<usize, EncodeError> {
    let plan = validate::check(desc).map_err(EncodeError::Invalid)?;
    let body = out
        .get_mut(HEADER_LEN..)
        .ok_or(EncodeError::BufferTooSmall)?;
    let body_len = postcard::to_slice(desc, body)
        .map_err(|_| EncodeError::BufferTooSmall)?
        .len();
    let total = HEADER_LEN + body_len;
    let mut header = Header {
        version: version_for(desc),
        flags: 0,
        total_len: u32::try_from(total).map_err(|_| EncodeError::BufferTooSmall)?,
        crc: 0,
        arena_bytes: u32::try_from(plan.total()).map_err(|_| EncodeError::BufferTooSmall)?,
    };
    // The arena field is inside the checksummed region: write it before hashing.
    let write_header = |out: &mut [u8], h: &Header| {
        for (d, s) in out.iter_mut().zip(h.to_bytes()) {
            *d = s;
        }
    };
    write_header(out, &header);
    header.crc = CHECKSUM.checksum(
        out.get(CHECKED_FROM..total)
            .ok_or(EncodeError::BufferTooSmall)?,
    );
    write_header(out, &header);
    Ok(total)
}

#[cfg(test)]
mod tests {
    #[cfg(feature = "f32")]
    use crate::testutil::tiny_f32;
    use crate::testutil::tiny_int8;
    use crate::Model;

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
        let blob = tiny_f32().blob();
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
        assert_eq!(hex(&blob), expected);
        let m = Model::parse(&blob).unwrap();
        assert_eq!(m.desc(), &tiny_f32().desc());
    }

    #[test]
    fn round_trips_int8_and_refuses_what_the_reader_would() {
        let owned = tiny_int8();
        let blob = owned.blob();
        assert_eq!(Model::parse(&blob).unwrap().desc(), &owned.desc());
        let mut bad = tiny_int8();
        bad.layers[1].inputs = 3;
        let mut out = vec![0u8; 1024];
        assert!(matches!(
            super::encode(&bad.desc(), &mut out),
            Err(super::EncodeError::Invalid(
                crate::FormatError::ShapeMismatch { layer: 1 }
            ))
        ));
        assert_eq!(
            super::encode(&owned.desc(), &mut out[..40]),
            Err(super::EncodeError::BufferTooSmall)
        );
        assert_eq!(
            super::encode(&owned.desc(), &mut out[..10]),
            Err(super::EncodeError::BufferTooSmall)
        );
    }
}
