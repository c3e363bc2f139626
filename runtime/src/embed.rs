//! Embedding a blob in flash at a 4-byte aligned address, by construction.
//!
//! The Cortex-M4 kernels read `Blocked4x4` weights with `LDM`/`VLDM`, which need them 4-byte
//! aligned. The packer aligns the weights within the blob, so the blob itself must start at a
//! multiple of 4; a plain `include_bytes!` gives alignment 1 and, when unlucky, a slower kernel
//! (BENCHMARKS.md measures how much slower). [`embed_blob!`](crate::embed_blob) and
//! [`AlignedBlob`] cannot be unlucky:
//!
//! ```
//! # // In firmware: `kinglet_runtime::embed_blob!("model.kgl")`; a doc test has no file.
//! # static STORE: kinglet_runtime::AlignedBlob<4> = kinglet_runtime::AlignedBlob::new(*b"KGLT");
//! # const MODEL: &[u8] = STORE.bytes();
//! assert_eq!(MODEL.as_ptr() as usize % 4, 0);
//! ```

/// Bytes at a 4-byte aligned address: what [`embed_blob!`](crate::embed_blob) puts a blob in,
/// and what `kinglet emit-rust` writes a blob as.
#[repr(C, align(4))]
pub struct AlignedBlob<const N: usize>([u8; N]);

impl<const N: usize> AlignedBlob<N> {
    /// Wraps `bytes` (in a `static`, they are placed at a multiple of 4).
    pub const fn new(bytes: [u8; N]) -> Self {
        AlignedBlob(bytes)
    }

    /// The bytes, for [`crate::Model::parse`] and the `const fn`s that read the header.
    pub const fn bytes(&self) -> &[u8] {
        &self.0
    }
}

/// Embeds the file at `$path` (relative to the file that invokes the macro, as with
/// `include_bytes!`) in a `static` [`AlignedBlob`], and evaluates to its bytes as a
/// `&'static [u8]` starting at a multiple of 4. Usable in `const` and `static` items, so the
/// compile-time readers take it:
///
/// ```ignore
/// const MODEL: &[u8] = kinglet_runtime::embed_blob!("model.kgl");
/// static mut SCRATCH: [u8; kinglet_runtime::scratch_bytes(MODEL)] = [0; kinglet_runtime::scratch_bytes(MODEL)];
/// let model = kinglet_runtime::Model::parse(MODEL)?;
/// assert!(model.weights_aligned());
/// ```
#[macro_export]
macro_rules! embed_blob {
    ($path:expr $(,)?) => {{
        static BLOB: $crate::AlignedBlob<{ include_bytes!($path).len() }> =
            $crate::AlignedBlob::new(*include_bytes!($path));
        BLOB.bytes()
    }};
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A blob-sized file of this crate, embedded as firmware would embed a model.
    const EMBEDDED: &[u8] = crate::embed_blob!("../LICENSE-MIT");

    #[test]
    fn embedded_bytes_are_the_file_and_aligned() {
        assert_eq!(EMBEDDED, include_bytes!("../LICENSE-MIT"));
        assert_eq!(EMBEDDED.as_ptr() as usize % 4, 0);
        static ODD: AlignedBlob<3> = AlignedBlob::new([1, 2, 3]);
        assert_eq!(ODD.bytes(), [1, 2, 3]);
        assert_eq!(ODD.bytes().as_ptr() as usize % 4, 0);
        assert_eq!(core::mem::align_of::<AlignedBlob<3>>(), 4);
    }

    #[test]
    fn const_readers_take_an_embedded_blob() {
        // Not a model: the header readers say 0, at compile time.
        const SCRATCH: usize = crate::scratch_bytes(EMBEDDED);
        assert_eq!(SCRATCH, 0);
    }
}
