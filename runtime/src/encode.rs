//! Writing blobs (feature `encode`; still `no_std`, no allocation): the host converter's side of
//! the format. The encoder validates with the same rules as the reader, so it cannot write a
//! blob that [`crate::Model::parse`] would reject. [`seal`] and [`reseal`] write header fields
//! only, for tools and tests that hand the reader blobs it must judge (the owned layer tables of
//! the `kinglet-builder` crate write their raw blobs with them).
use crate::error::FormatError;
use crate::validate;
use crate::wire::format::ModelDesc;
use crate::wire::header::{offset, Header, CHECKED_FROM, CHECKSUM, HEADER_LEN};
use crate::wire::version::version_for;

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
    let scratch = u32::try_from(plan.total()).map_err(|_| EncodeError::BufferTooSmall)?;
    let blob = out.get_mut(..total).ok_or(EncodeError::BufferTooSmall)?;
    seal(blob, version_for(desc), scratch)?;
    Ok(total)
}

/// Writes the header of `blob`, whose body is already in place after the first [`HEADER_LEN`]
/// bytes: the magic, `version`, zero flags, the length of `blob`, `scratch_bytes` and the CRC.
///
/// Unlike [`encode`] this checks nothing about the body: it is for tools and tests that must
/// hand the reader bytes for it to judge. Fails only when `blob` is shorter than the header or
/// longer than a `u32` can say.
pub fn seal(blob: &mut [u8], version: u16, scratch_bytes: u32) -> Result<(), EncodeError> {
    let header = Header {
        version,
        flags: 0,
        total_len: 0,
        crc: 0,
        scratch_bytes,
    };
    let head = blob
        .get_mut(..HEADER_LEN)
        .ok_or(EncodeError::BufferTooSmall)?;
    for (d, s) in head.iter_mut().zip(header.to_bytes()) {
        *d = s;
    }
    reseal(blob)
}

/// Rewrites the length and CRC fields of `blob` for its bytes as they are now, leaving the magic,
/// version, flags and scratch fields alone: after a test or tool has changed bytes of a blob, the
/// length and checksum no longer stop the change at the door. Checks nothing else; fails only
/// when `blob` is shorter than the header or longer than a `u32` can say.
pub fn reseal(blob: &mut [u8]) -> Result<(), EncodeError> {
    if blob.len() < HEADER_LEN {
        return Err(EncodeError::BufferTooSmall);
    }
    let len = u32::try_from(blob.len()).map_err(|_| EncodeError::BufferTooSmall)?;
    put(blob, offset::TOTAL_LEN, len.to_le_bytes())?;
    let crc = CHECKSUM.checksum(
        blob.get(CHECKED_FROM..)
            .ok_or(EncodeError::BufferTooSmall)?,
    );
    put(blob, offset::CRC, crc.to_le_bytes())
}

/// Writes the 4 bytes `v` at `at`.
fn put(blob: &mut [u8], at: usize, v: [u8; 4]) -> Result<(), EncodeError> {
    let field = blob
        .get_mut(at..at + 4)
        .ok_or(EncodeError::BufferTooSmall)?;
    for (d, s) in field.iter_mut().zip(v) {
        *d = s;
    }
    Ok(())
}
