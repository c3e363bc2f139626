//! The fixed 20-byte header (`FORMAT.md` §2) and the `const fn`s that read it at build time.
use crate::error::FormatError;
use crate::wire::version::accepts;
#[cfg(test)]
use crate::wire::version::FORMAT_VERSION;

/// Magic bytes at offset 0.
pub const MAGIC: [u8; 4] = *b"KGLT";

/// Length of the fixed header in bytes.
pub const HEADER_LEN: usize = 20;

/// Byte offsets of the header's fields (`FORMAT.md` §2).
pub mod offset {
    /// The magic, 4 bytes.
    pub const MAGIC: usize = 0;
    /// The format version, `u16`.
    pub const VERSION: usize = 4;
    /// The reserved flags, `u16`.
    pub const FLAGS: usize = 6;
    /// The blob's total length, `u32`.
    pub const TOTAL_LEN: usize = 8;
    /// The CRC, `u32`.
    pub const CRC: usize = 12;
    /// The scratch size, `u32` (the first checksummed field).
    pub const SCRATCH: usize = 16;
}

/// Byte offset where the checksummed region starts (the scratch field and the body).
pub const CHECKED_FROM: usize = offset::SCRATCH;

/// The checksum: CRC-32/ISO-HDLC (the CRC of zlib, PNG and Ethernet).
pub const CHECKSUM: crc::Crc<u32> = crc::Crc::<u32>::new(&crc::CRC_32_ISO_HDLC);

/// The header's fields, decoded (not yet checked against the body).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Header {
    /// Format version.
    pub version: u16,
    /// Reserved flags; must be zero.
    pub flags: u16,
    /// Length of the whole blob, header included.
    pub total_len: u32,
    /// CRC-32/ISO-HDLC of bytes `16..total_len`.
    pub crc: u32,
    /// Scratch bytes inference needs.
    pub scratch_bytes: u32,
}

/// Byte `i` of `b`, or 0 past the end. `slice::get` is not yet callable in a `const fn`, so
/// this indexes behind an explicit bounds check.
#[allow(clippy::indexing_slicing)]
const fn byte(b: &[u8], i: usize) -> u8 {
    if i < b.len() {
        b[i]
    } else {
        0
    }
}

const fn u32_at(b: &[u8], at: usize) -> u32 {
    u32::from_le_bytes([
        byte(b, at),
        byte(b, at + 1),
        byte(b, at + 2),
        byte(b, at + 3),
    ])
}

const fn u16_at(b: &[u8], at: usize) -> u16 {
    u16::from_le_bytes([byte(b, at), byte(b, at + 1)])
}

const fn has_magic(b: &[u8]) -> bool {
    matches!(b, [b'K', b'G', b'L', b'T', ..])
}

/// Scratch bytes the blob's model needs, read from its header at compile time.
///
/// Returns 0 for bytes that do not start with a Kinglet header; [`crate::Model::parse`] checks
/// the value against the layer table, so a firmware sizing a `static` with this cannot be
/// handed a model that needs more:
///
/// ```
/// const BLOB: &[u8] = &[0; 4]; // in firmware: include_bytes!("model.kgl")
/// static SCRATCH_LEN: usize = kinglet_runtime::scratch_bytes(BLOB);
/// assert_eq!(SCRATCH_LEN, 0);
/// ```
pub const fn scratch_bytes(blob: &[u8]) -> usize {
    if blob.len() < HEADER_LEN || !has_magic(blob) {
        return 0;
    }
    u32_at(blob, offset::SCRATCH) as usize
}

/// Total length of the blob as its header states (0 without a Kinglet header). Use it to cut a
/// blob out of a larger flash region before parsing.
pub const fn blob_len(blob: &[u8]) -> usize {
    if blob.len() < HEADER_LEN || !has_magic(blob) {
        return 0;
    }
    u32_at(blob, offset::TOTAL_LEN) as usize
}

impl Header {
    /// Decodes and checks the header of `blob` (magic, version, flags, lengths, checksum).
    pub fn read(blob: &[u8]) -> Result<Header, FormatError> {
        let got = u32::try_from(blob.len()).unwrap_or(u32::MAX);
        if blob.len() < HEADER_LEN {
            // Tell a wrong file apart from a short one when the magic is already visible.
            if blob.len() >= 4 && !has_magic(blob) {
                return Err(FormatError::BadMagic);
            }
            return Err(FormatError::TooShort {
                needed: HEADER_LEN as u32,
                got,
            });
        }
        if !has_magic(blob) {
            return Err(FormatError::BadMagic);
        }
        let h = Header {
            version: u16_at(blob, offset::VERSION),
            flags: u16_at(blob, offset::FLAGS),
            total_len: u32_at(blob, offset::TOTAL_LEN),
            crc: u32_at(blob, offset::CRC),
            scratch_bytes: u32_at(blob, offset::SCRATCH),
        };
        if !accepts(h.version) {
            return Err(FormatError::UnsupportedVersion { found: h.version });
        }
        if h.flags != 0 {
            return Err(FormatError::ReservedFlags);
        }
        if (h.total_len as usize) < HEADER_LEN {
            return Err(FormatError::Malformed);
        }
        if got < h.total_len {
            return Err(FormatError::TooShort {
                needed: h.total_len,
                got,
            });
        }
        if got > h.total_len {
            return Err(FormatError::LengthMismatch {
                header: h.total_len,
                got,
            });
        }
        let computed = CHECKSUM.checksum(blob.get(CHECKED_FROM..).unwrap_or(&[]));
        if computed != h.crc {
            return Err(FormatError::ChecksumMismatch {
                stored: h.crc,
                computed,
            });
        }
        Ok(h)
    }

    /// Encodes the header into its 20 bytes.
    pub fn to_bytes(&self) -> [u8; HEADER_LEN] {
        let mut b = [0u8; HEADER_LEN];
        let fields: [&[u8]; 6] = [
            &MAGIC,
            &self.version.to_le_bytes(),
            &self.flags.to_le_bytes(),
            &self.total_len.to_le_bytes(),
            &self.crc.to_le_bytes(),
            &self.scratch_bytes.to_le_bytes(),
        ];
        let mut at = 0;
        for f in fields {
            for (dst, src) in b.iter_mut().skip(at).zip(f) {
                *dst = *src;
            }
            at += f.len();
        }
        b
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn crc_check_value_from_the_catalogue() {
        // Check value of CRC-32/ISO-HDLC for ASCII "123456789": 0xCBF43926, from Greg Cook's
        // "Catalogue of parametrised CRC algorithms" (reveng.sourceforge.io/crc-catalogue).
        assert_eq!(CHECKSUM.checksum(b"123456789"), 0xCBF4_3926);
    }

    #[test]
    fn header_round_trips_and_const_readers_agree() {
        let h = Header {
            version: FORMAT_VERSION,
            flags: 0,
            total_len: 20,
            crc: CHECKSUM.checksum(&[7, 0, 0, 0]),
            scratch_bytes: 7,
        };
        let b = h.to_bytes();
        assert_eq!(&b[..4], b"KGLT");
        assert_eq!(Header::read(&b), Ok(h));
        assert_eq!(scratch_bytes(&b), 7);
        assert_eq!(blob_len(&b), 20);
        assert_eq!(scratch_bytes(b"nope, not a model at all"), 0);
        assert_eq!(blob_len(&b[..19]), 0);
    }

    #[test]
    fn rejects_each_header_fault() {
        let good = Header {
            version: 1,
            flags: 0,
            total_len: 20,
            crc: CHECKSUM.checksum(&[0, 0, 0, 0]),
            scratch_bytes: 0,
        }
        .to_bytes();
        assert_eq!(
            Header::read(&good[..10]),
            Err(FormatError::TooShort {
                needed: 20,
                got: 10
            })
        );
        assert_eq!(
            Header::read(b"PK\x03\x04 zip file"),
            Err(FormatError::BadMagic)
        );
        let mut v8 = good;
        v8[offset::VERSION] = 8;
        assert_eq!(
            Header::read(&v8),
            Err(FormatError::UnsupportedVersion { found: 8 })
        );
        let mut v0 = good;
        v0[offset::VERSION] = 0;
        assert_eq!(
            Header::read(&v0),
            Err(FormatError::UnsupportedVersion { found: 0 })
        );
        let mut flags = good;
        flags[offset::FLAGS] = 1;
        assert_eq!(Header::read(&flags), Err(FormatError::ReservedFlags));
        let mut long = [0u8; 21];
        long[..20].copy_from_slice(&good);
        assert_eq!(
            Header::read(&long),
            Err(FormatError::LengthMismatch {
                header: 20,
                got: 21
            })
        );
        let mut len = good;
        len[offset::TOTAL_LEN] = 30;
        assert_eq!(
            Header::read(&len),
            Err(FormatError::TooShort {
                needed: 30,
                got: 20
            })
        );
        let mut crc = good;
        crc[offset::CRC] ^= 1;
        assert!(matches!(
            Header::read(&crc),
            Err(FormatError::ChecksumMismatch { .. })
        ));
    }
}
