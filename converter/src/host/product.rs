//! The matrix product every batched layer runs: `a · wᵀ` for row-major `a` (`rows × n`) and
//! `w` (`m × n`, a layer's `[outputs][inputs]` weights), into row-major `rows × m`.
//!
//! Through `faer` (its matrix-multiplication kernels pick AVX-512, AVX2/FMA or SSE at run time;
//! in `converter/benches/vet.rs`'s shape, 1,024 × 784 by 784 × 100, they ran 1.4–1.6× faster
//! than `matrixmultiply`'s AVX2 kernels on one thread of the benchmark machine, which has
//! AVX-512). One thread per product: the callers run
//! batches in parallel already.
use faer::linalg::matmul::matmul;
use faer::{Accum, MatMut, MatRef, Par};

/// A number type a layer's product runs in.
pub(crate) trait Scalar: Copy + Default + Send + Sync + 'static {
    /// `out = a · wᵀ`: `a` is `rows × n`, `w` is `m × n`, `out` is `rows × m`, all row-major.
    /// Does nothing unless the lengths are those.
    fn product_into(a: &[Self], w: &[Self], rows: usize, n: usize, m: usize, out: &mut [Self]);
}

macro_rules! scalar {
    ($t:ty) => {
        impl Scalar for $t {
            fn product_into(a: &[$t], w: &[$t], rows: usize, n: usize, m: usize, out: &mut [$t]) {
                if a.len() != rows * n || w.len() != m * n || out.len() != rows * m {
                    return;
                }
                if n == 0 {
                    out.fill(0.0);
                    return;
                }
                let a = MatRef::from_row_major_slice(a, rows, n);
                let w = MatRef::from_row_major_slice(w, m, n);
                let out = MatMut::from_row_major_slice_mut(out, rows, m);
                matmul(out, Accum::Replace, a, w.transpose(), 1.0, Par::Seq);
            }
        }
    };
}
scalar!(f32);
scalar!(f64);

/// `a · wᵀ` as a new row-major `rows × m` vector (see [`Scalar::product_into`]).
pub(crate) fn product<T: Scalar>(a: &[T], w: &[T], rows: usize, n: usize, m: usize) -> Vec<T> {
    let mut out = vec![T::default(); rows * m];
    T::product_into(a, w, rows, n, m, &mut out);
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Against the textbook triple loop, on small integers (every sum exact in f32).
    #[test]
    fn product_is_the_matrix_product() {
        let (rows, n, m) = (5usize, 7usize, 3usize);
        let a: Vec<f32> = (0..rows * n).map(|i| (i % 11) as f32 - 5.0).collect();
        let w: Vec<f32> = (0..m * n).map(|i| (i % 7) as f32 - 3.0).collect();
        let got = product(&a, &w, rows, n, m);
        for r in 0..rows {
            for o in 0..m {
                let want: f32 = (0..n).map(|i| a[r * n + i] * w[o * n + i]).sum();
                assert_eq!(got[r * m + o], want, "({r}, {o})");
            }
        }
        // Zero inputs give zeros; wrong lengths leave the output alone.
        assert_eq!(product::<f64>(&[], &[], 2, 0, 3), vec![0.0; 6]);
        let mut out = vec![9.0f32; 4];
        f32::product_into(&a, &w, rows, n, m, &mut out);
        assert_eq!(out, vec![9.0; 4]);
    }
}
