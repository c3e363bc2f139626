//! The blobs the benchmark runs, 4-byte aligned (so the Cortex-M4 kernels can use `LDM`/`VLDM`).
//! `*_om` blobs are output-major twins with the same quantised weights: the baseline.
//! `*_UNALIGNED` (Cortex-M4 only, `kb_unaligned`) are the same bytes one byte past a 4-byte
//! boundary: what a firmware gets that embeds a blob with `include_bytes!` and is unlucky.

/// Bytes at a 4-byte aligned address.
#[repr(C, align(4))]
pub struct Aligned<const N: usize>(pub [u8; N]);

/// Bytes one past a 4-byte aligned address.
#[repr(C, align(4))]
pub struct Unaligned<const N: usize> {
    _skip: u8,
    /// The bytes, at an address ≡ 1 (mod 4).
    pub bytes: [u8; N],
}

macro_rules! blob_unaligned {
    ($name:ident, $file:literal) => {
        #[doc = concat!("`", $file, "`, one byte past a 4-byte boundary")]
        #[cfg(kb_unaligned)]
        pub static $name: &[u8] = {
            const B: &[u8] = include_bytes!(concat!(env!("KB_BLOBS"), "/", $file));
            static A: Unaligned<{ B.len() }> = Unaligned {
                _skip: 0,
                bytes: *include_bytes!(concat!(env!("KB_BLOBS"), "/", $file)),
            };
            &A.bytes
        };
    };
}

macro_rules! blob {
    ($name:ident, $file:literal) => {
        #[doc = concat!("`", $file, "`")]
        pub static $name: &[u8] = {
            const B: &[u8] = include_bytes!(concat!(env!("KB_BLOBS"), "/", $file));
            static A: Aligned<{ B.len() }> =
                Aligned(*include_bytes!(concat!(env!("KB_BLOBS"), "/", $file)));
            &A.0
        };
    };
}

blob!(I8_784X100, "i8_784x100.kgl");
blob!(I8_784X100_OM, "i8_784x100.om.kgl");
blob!(I8_64X32, "i8_64x32.kgl");
blob!(I8_64X32_OM, "i8_64x32.om.kgl");
blob!(F32_64X32, "f32_64x32.kgl");
blob!(F32_64X32_OM, "f32_64x32.om.kgl");
#[cfg(kb_big_f32)]
blob!(F32_784X100, "f32_784x100.kgl");
#[cfg(kb_big_f32)]
blob!(F32_784X100_OM, "f32_784x100.om.kgl");
#[cfg(kb_big_models)]
blob!(I8_784X100_WHOLE, "i8_784x100.whole.kgl");
#[cfg(kb_big_models)]
blob!(I8_784X100_WHOLE_OM, "i8_784x100.whole.om.kgl");
blob!(I8_18X40, "i8_18x40.kgl");
blob!(I4_784X100, "i4_784x100.kgl");
blob!(I16IN_784X100, "i16in_784x100.kgl");
blob!(I16IN_784X100_OM, "i16in_784x100.om.kgl");
blob!(I16IN_64X64, "i16in_64x64.kgl");
blob!(I16IN_64X64_OM, "i16in_64x64.om.kgl");
blob!(I8_18X40_OM, "i8_18x40.om.kgl");
blob!(F32_18X40, "f32_18x40.kgl");
blob!(DIGITS, "digits.kgl");
blob!(DIGITS_OM, "digits.om.kgl");
blob!(VIBRATION, "vibration.kgl");
blob!(VIBRATION_OM, "vibration.om.kgl");
blob!(DIGITS_F32, "digits_float.kgl");
blob!(DIGITS_INT4, "digits_int4.kgl");
blob!(DIGITS_INT16_INPUT, "digits_int16_input.kgl");
blob!(VIBRATION_F32, "vibration_float.kgl");
blob_unaligned!(I8_784X100_UNALIGNED, "i8_784x100.kgl");
blob_unaligned!(I8_64X32_UNALIGNED, "i8_64x32.kgl");
blob_unaligned!(F32_784X100_UNALIGNED, "f32_784x100.kgl");
blob_unaligned!(F32_64X32_UNALIGNED, "f32_64x32.kgl");
blob_unaligned!(DIGITS_UNALIGNED, "digits.kgl");
blob_unaligned!(VIBRATION_UNALIGNED, "vibration.kgl");
