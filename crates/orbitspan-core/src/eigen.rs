//! Eigen-decompositions of real symmetric and complex Hermitian matrices:
//! `A = V Λ Vᴴ` with `V` unitary (orthogonal) and `Λ` real.
//!
//! Every orbit's covariance or Gram matrix is decomposed here. Above a
//! size the decomposition is faer's (Householder tridiagonalisation, then
//! divide and conquer on the tridiagonal matrix); small matrices use
//! nalgebra's `SymmetricEigen` (implicit QR), which is as fast there. nalgebra's is also the slow obvious reference in the
//! tests: on complex matrices it is 8 to 25 times slower than faer's from
//! 48x48 to 256x256 (measured here, one run), which is what made the
//! switch worth a dependency. faer runs sequentially here (no thread pool),
//! so results do not depend on the number of threads.

use nalgebra::{DMatrix, DVector};
use num_complex::Complex64;

/// Real matrices from this size up go to faer (from one measurement here:
/// about equal speed at 64, 1.2x faster at 96, 2.5x at 256; nalgebra
/// faster below 48).
const REAL_FAER_FROM: usize = 96;

/// Complex matrices from this size up go to faer (one measurement here:
/// 1.1x faster at 16, 1.5x at 32, 8x at 48, 25x at 256). Below it the gain
/// is small while faer's matrix products add their per-thread scratch
/// buffers: with 40 the small-patch workload (three 40x40 blocks per fit)
/// fitted in the same time and peaked 8 MB higher (7.7 against 5.7 times
/// its stack's f32 size, three runs each).
const COMPLEX_FAER_FROM: usize = 48;

/// Eigenvalues (in no particular order) and orthonormal eigenvectors
/// (columns, in the eigenvalues' order) of the real symmetric `a`; only its
/// lower triangle is read.
pub(crate) fn symmetric(a: DMatrix<f64>) -> (DVector<f64>, DMatrix<f64>) {
    let n = a.nrows();
    if n >= REAL_FAER_FROM || n == 0 {
        if let Some(done) = with_faer(&a) {
            return done;
        }
    }
    reference(a)
}

/// Eigenvalues and orthonormal eigenvectors of the Hermitian `a` (lower
/// triangle read).
pub(crate) fn hermitian(a: DMatrix<Complex64>) -> (DVector<f64>, DMatrix<Complex64>) {
    let n = a.nrows();
    if n >= COMPLEX_FAER_FROM || n == 0 {
        if let Some((values, vectors)) = with_faer(&a) {
            return (values.map(|z| z.re), vectors);
        }
    }
    reference(a)
}

/// nalgebra's decomposition (the reference), real or complex.
pub(crate) fn reference<T: nalgebra::ComplexField<RealField = f64>>(a: DMatrix<T>) -> (DVector<f64>, DMatrix<T>) {
    let eig = nalgebra::SymmetricEigen::new(a);
    (eig.eigenvalues, eig.eigenvectors)
}

/// faer's decomposition of the lower triangle of `a` (column-major, read in
/// place); `None` if it reports no convergence (the caller falls back).
fn with_faer<T>(a: &DMatrix<T>) -> Option<(DVector<T>, DMatrix<T>)>
where
    T: faer::traits::ComplexField + nalgebra::Scalar + Copy,
{
    let n = a.nrows();
    if n == 0 {
        return Some((DVector::from_vec(Vec::new()), DMatrix::from_vec(0, 0, Vec::new())));
    }
    let view = faer::MatRef::from_column_major_slice(a.as_slice(), n, n);
    let eig = view.self_adjoint_eigen(faer::Side::Lower).ok()?;
    let (s, u) = (eig.S(), eig.U());
    Some((DVector::from_fn(n, |i, _| s[i]), DMatrix::from_fn(n, n, |i, j| u[(i, j)])))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::prng::SplitMix64;

    /// `B Bᴴ` for a random `n x k` `B`: rank `min(n, k)`, so `k < n` gives a
    /// zero eigenvalue of multiplicity `n − k` (a degenerate cluster).
    fn wishart_real(n: usize, k: usize, seed: u64) -> DMatrix<f64> {
        let mut rng = SplitMix64(seed);
        let b = DMatrix::from_fn(n, k, |_, _| rng.normal());
        &b * b.transpose()
    }

    fn wishart_complex(n: usize, k: usize, seed: u64) -> DMatrix<Complex64> {
        let mut rng = SplitMix64(seed);
        let b = DMatrix::from_fn(n, k, |_, _| Complex64::new(rng.normal(), rng.normal()));
        &b * b.adjoint()
    }

    fn sorted(v: &DVector<f64>) -> Vec<f64> {
        let mut s: Vec<f64> = v.iter().copied().collect();
        s.sort_by(f64::total_cmp);
        s
    }

    /// `A V = V Λ`, `Vᴴ V = I` and the eigenvalues equal the reference's,
    /// all to round-off relative to the largest eigenvalue.
    fn check<T>(a: &DMatrix<T>, values: &DVector<f64>, vectors: &DMatrix<T>, reference: &DVector<f64>, what: &str)
    where
        T: nalgebra::ComplexField<RealField = f64> + Copy,
    {
        let n = a.nrows();
        let scale = reference.iter().fold(0.0f64, |m, v| m.max(v.abs())).max(1e-300);
        let lambda = DMatrix::from_fn(n, n, |i, j| if i == j { T::from_real(values[i]) } else { T::zero() });
        let residual = (a * vectors - vectors * lambda).norm();
        assert!(residual < 1e-11 * scale, "{what}: ||A V − V Λ|| = {residual:e}");
        let gram = vectors.adjoint() * vectors;
        let off = (gram - DMatrix::<T>::identity(n, n)).norm();
        assert!(off < 1e-12 * n as f64, "{what}: ||Vᴴ V − I|| = {off:e}");
        for (x, y) in sorted(values).iter().zip(sorted(reference)) {
            assert!((x - y).abs() < 1e-11 * scale, "{what}: eigenvalue {x} against the reference's {y}");
        }
    }

    /// Each `(n, rank)` case: `decompose` against the reference by [`check`]
    /// (an empty matrix gives empty results).
    fn compare<T>(cases: &[(usize, usize)], make: impl Fn(usize, usize) -> DMatrix<T>, decompose: impl Fn(DMatrix<T>) -> (DVector<f64>, DMatrix<T>), kind: &str)
    where
        T: nalgebra::ComplexField<RealField = f64> + Copy,
    {
        for &(n, k) in cases {
            let a = make(n, k);
            let (values, vectors) = decompose(a.clone());
            if n == 0 {
                assert_eq!((values.len(), vectors.shape()), (0, (0, 0)));
                continue;
            }
            let (expected, _) = reference(a.clone());
            check(&a, &values, &vectors, &expected, &format!("{kind} {n}x{n}, rank {k}"));
        }
    }

    #[test]
    fn real_decompositions_match_the_reference_on_both_sides_of_the_switch() {
        let cases = [(0, 0), (1, 1), (5, 5), (40, 12), (63, 63), (64, 64), (70, 20), (130, 130)];
        compare(&cases, |n, k| wishart_real(n, k, 11 + n as u64), symmetric, "real");
    }

    #[test]
    fn complex_decompositions_match_the_reference_on_both_sides_of_the_switch() {
        let cases = [(0, 0), (1, 1), (6, 6), (33, 10), (47, 47), (48, 48), (64, 64), (100, 30)];
        compare(&cases, |n, k| wishart_complex(n, k, 29 + n as u64), hermitian, "complex");
    }

    #[test]
    fn only_the_lower_triangle_is_read() {
        let a = wishart_complex(70, 70, 5);
        let mut spoiled = a.clone();
        for j in 1..70 {
            for i in 0..j {
                spoiled[(i, j)] = Complex64::new(f64::NAN, 1e300);
            }
        }
        let (values, _) = hermitian(spoiled);
        let (expected, _) = reference(a);
        for (x, y) in sorted(&values).iter().zip(sorted(&expected)) {
            assert!((x - y).abs() < 1e-10 * y.abs().max(1.0), "{x} against {y}");
        }
        let b = wishart_real(80, 80, 6);
        let mut spoiled = b.clone();
        spoiled[(0, 79)] = f64::NAN;
        let (values, _) = symmetric(spoiled);
        let (expected, _) = reference(b);
        for (x, y) in sorted(&values).iter().zip(sorted(&expected)) {
            assert!((x - y).abs() < 1e-10 * y.abs().max(1.0), "{x} against {y}");
        }
    }
}
