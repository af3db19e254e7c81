//! Real matrix products `C ← α op(A) op(B) (+ C)` on blocks of nalgebra
//! matrices, the blocked and vectorised kind, in one place so that each
//! build uses the library that is fast on it.
//!
//! Natively that is the matrixmultiply crate (nalgebra's own product
//! kernel, with AVX kernels chosen at run time), called with strides so
//! that transposed and sub-blocks are read in place, never copied. In
//! WebAssembly matrixmultiply has a 128-bit SIMD kernel for `f32` only and
//! runs `f64` products on its scalar fallback, while faer's products (the
//! gemm crate) have a `simd128` kernel, enabled for the browser build in
//! this crate's manifest; so the browser build multiplies with faer (one
//! run here: the browser fit of the tiled workload 1.4 times faster). Both
//! are checked against the definition (a triple loop) in the tests, so the
//! native test run covers the browser's path too. faer runs sequentially
//! here (no thread pool): results do not depend on the number of threads.

use nalgebra::DMatrix;
use std::ops::Range;

/// Which library multiplies.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(crate) enum Backend {
    Matrixmultiply,
    Faer,
}

/// The library this build multiplies with (see the module documentation).
pub(crate) const BACKEND: Backend = if cfg!(target_arch = "wasm32") { Backend::Faer } else { Backend::Matrixmultiply };

/// A block of a matrix, possibly transposed: `op(M[rows, cols])`.
#[derive(Clone, Debug)]
pub(crate) struct Part<'a> {
    m: &'a DMatrix<f64>,
    rows: Range<usize>,
    cols: Range<usize>,
    transposed: bool,
}

impl<'a> Part<'a> {
    /// The whole matrix.
    pub fn of(m: &'a DMatrix<f64>) -> Part<'a> {
        Part { m, rows: 0..m.nrows(), cols: 0..m.ncols(), transposed: false }
    }
    /// Rows `rows` of this block (of the untransposed matrix).
    pub fn rows(mut self, rows: Range<usize>) -> Part<'a> {
        assert!(rows.end <= self.rows.len(), "rows {rows:?} of a block of {}", self.rows.len());
        self.rows = self.rows.start + rows.start..self.rows.start + rows.end;
        self
    }
    /// Columns `cols` of this block (of the untransposed matrix).
    pub fn cols(mut self, cols: Range<usize>) -> Part<'a> {
        assert!(cols.end <= self.cols.len(), "columns {cols:?} of a block of {}", self.cols.len());
        self.cols = self.cols.start + cols.start..self.cols.start + cols.end;
        self
    }
    /// Rows `range` of `op(M[rows, cols])` (columns of the block when it
    /// is transposed).
    pub fn op_rows(mut self, range: Range<usize>) -> Part<'a> {
        if !self.transposed {
            return self.rows(range);
        }
        assert!(range.end <= self.cols.len(), "rows {range:?} of a transposed block of {}", self.cols.len());
        self.cols = self.cols.start + range.start..self.cols.start + range.end;
        self
    }
    /// The transpose.
    pub fn t(mut self) -> Part<'a> {
        self.transposed = !self.transposed;
        self
    }
    /// Rows and columns of `op(M[rows, cols])`.
    fn shape(&self) -> (usize, usize) {
        match self.transposed {
            false => (self.rows.len(), self.cols.len()),
            true => (self.cols.len(), self.rows.len()),
        }
    }
    fn faer(&self) -> faer::MatRef<'a, f64> {
        let whole = faer::MatRef::from_column_major_slice(self.m.as_slice(), self.m.nrows(), self.m.ncols());
        let block = whole.submatrix(self.rows.start, self.cols.start, self.rows.len(), self.cols.len());
        if self.transposed {
            block.transpose()
        } else {
            block
        }
    }
    /// The first element's offset in the matrix's column-major storage and
    /// the row and column strides of `op(M[rows, cols])`.
    fn strides(&self) -> (usize, isize, isize) {
        let offset = self.rows.start + self.cols.start * self.m.nrows();
        let (rs, cs) = (1, self.m.nrows() as isize);
        (offset, if self.transposed { cs } else { rs }, if self.transposed { rs } else { cs })
    }
}

/// `c[at..] ← alpha a b` (or `+=` when `accumulate`) for the block of `c`
/// starting at row, column `at` with the product's shape.
pub(crate) fn into(c: &mut DMatrix<f64>, at: (usize, usize), accumulate: bool, alpha: f64, a: Part, b: Part) {
    into_with(BACKEND, c, at, accumulate, alpha, a, b)
}

/// `alpha a b` as a new matrix.
pub(crate) fn mul(alpha: f64, a: Part, b: Part) -> DMatrix<f64> {
    let mut c = DMatrix::zeros(a.shape().0, b.shape().1);
    into(&mut c, (0, 0), false, alpha, a, b);
    c
}

/// `c += alpha a aᵀ` on and below the diagonal blocks only: with the rows
/// of `a` in two halves `[a0; a1]`, the blocks `a0 a0ᵀ`, `a1 a0ᵀ` and
/// `a1 a1ᵀ`, three quarters of the products of the whole `a aᵀ`. The block
/// above (rows `..n/2`, columns `n/2..`) is left as it is; [`mirror_lower`]
/// fills it.
pub(crate) fn add_lower_outer(c: &mut DMatrix<f64>, alpha: f64, a: Part) {
    let n = a.shape().0;
    let h = n / 2;
    let (top, bottom) = (a.clone().op_rows(0..h), a.op_rows(h..n));
    into(c, (0, 0), true, alpha, top.clone(), top.clone().t());
    into(c, (h, 0), true, alpha, bottom.clone(), top.t());
    into(c, (h, h), true, alpha, bottom.clone(), bottom.t());
}

/// Copies the block below the diagonal blocks of [`add_lower_outer`]
/// (rows `n/2..`, columns `..n/2`) to its mirror above, so that a matrix
/// made there is whole and symmetric.
pub(crate) fn mirror_lower(c: &mut DMatrix<f64>) {
    let n = c.nrows();
    for a in 0..n / 2 {
        for b in n / 2..n {
            c[(a, b)] = c[(b, a)];
        }
    }
}

/// [`into`] with a chosen library.
pub(crate) fn into_with(backend: Backend, c: &mut DMatrix<f64>, at: (usize, usize), accumulate: bool, alpha: f64, a: Part, b: Part) {
    let ((m, k), (k2, n)) = (a.shape(), b.shape());
    assert_eq!(k, k2, "a {m}x{k} block times a {k2}x{n} block");
    assert!(at.0 + m <= c.nrows() && at.1 + n <= c.ncols(), "a {m}x{n} product at {at:?} of a {}x{} matrix", c.nrows(), c.ncols());
    match backend {
        Backend::Matrixmultiply => {
            if m == 0 || n == 0 {
                return;
            }
            let ((a_at, rsa, csa), (b_at, rsb, csb)) = (a.strides(), b.strides());
            let c_at = at.0 + at.1 * c.nrows();
            let csc = c.nrows() as isize;
            let (a_data, b_data, c_data) = (a.m.as_slice(), b.m.as_slice(), c.as_mut_slice());
            // SAFETY: the shapes were checked above: every element that
            // `dgemm` reads lies in a block of `a.m` or `b.m` and every one
            // it writes in the `m x n` block of `c` at `at` (column-major,
            // row stride 1, column stride the number of rows), and `c` is
            // borrowed mutably, apart from `a.m` and `b.m`. With `k = 0`
            // nothing of `a` or `b` is read (the offsets may then point one
            // past the end, which `wrapping_add` allows).
            unsafe {
                matrixmultiply::dgemm(
                    m,
                    k,
                    n,
                    alpha,
                    a_data.as_ptr().wrapping_add(a_at),
                    rsa,
                    csa,
                    b_data.as_ptr().wrapping_add(b_at),
                    rsb,
                    csb,
                    if accumulate { 1.0 } else { 0.0 },
                    c_data.as_mut_ptr().add(c_at),
                    1,
                    csc,
                );
            }
        }
        Backend::Faer => {
            let rows = c.nrows();
            let cols = c.ncols();
            let whole = faer::MatMut::from_column_major_slice_mut(c.as_mut_slice(), rows, cols);
            let dst = whole.submatrix_mut(at.0, at.1, m, n);
            let beta = if accumulate { faer::Accum::Add } else { faer::Accum::Replace };
            faer::linalg::matmul::matmul(dst, beta, a.faer(), b.faer(), alpha, faer::Par::Seq);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::prng::SplitMix64;

    fn random(rng: &mut SplitMix64, r: usize, c: usize) -> DMatrix<f64> {
        DMatrix::from_fn(r, c, |_, _| rng.between(-1.0, 1.0))
    }

    /// `a aᵀ` by blocks (then mirrored) against the whole product, for
    /// `a` as it is and transposed, odd and even sizes, added to what was there.
    #[test]
    fn lower_outer_products_mirrored_are_the_whole_product() {
        let mut rng = SplitMix64(8);
        for (n, k) in [(1, 3), (2, 1), (5, 4), (8, 3), (33, 17)] {
            for transposed in [false, true] {
                let src = if transposed { random(&mut rng, k, n) } else { random(&mut rng, n, k) };
                let a = if transposed { Part::of(&src).t() } else { Part::of(&src) };
                let start = random(&mut rng, n, n);
                let start = &start + start.transpose();
                let mut blocks = start.clone();
                add_lower_outer(&mut blocks, 1.5, a.clone());
                mirror_lower(&mut blocks);
                let mut whole = start.clone();
                into(&mut whole, (0, 0), true, 1.5, a.clone(), a.t());
                assert!((&blocks - &whole).amax() < 1e-12, "{n}x{k} transposed {transposed}");
            }
        }
    }

    /// Both libraries against the triple loop: whole matrices and row
    /// blocks, transposed or not, replacing or accumulating into a block of
    /// a larger matrix (the rest of which must stay as it was), shapes from
    /// empty to beyond the libraries' blocking sizes.
    #[test]
    fn products_match_the_definition() {
        let mut rng = SplitMix64(5);
        for backend in [Backend::Matrixmultiply, Backend::Faer] {
            for (m, k, n) in [(0, 3, 2), (3, 0, 2), (1, 1, 1), (5, 7, 3), (17, 9, 33), (70, 130, 65)] {
                for (ta, tb) in [(false, false), (true, false), (false, true), (true, true)] {
                    for accumulate in [false, true] {
                        let extra = 2;
                        // One column more, the block starting at column 1.
                        let a_src = if ta { random(&mut rng, k + extra, m + 1) } else { random(&mut rng, m + extra, k + 1) };
                        let b_src = random(&mut rng, if tb { n + extra } else { k + extra }, if tb { k } else { n });
                        // Row blocks of row blocks: offset 1 + 1.
                        let (a_rows, a_cols) = if ta { (k, m) } else { (m, k) };
                        let mut a = Part::of(&a_src).rows(1..2 + a_rows).rows(1..1 + a_rows).cols(1..1 + a_cols);
                        if ta {
                            a = a.t();
                        }
                        let mut b = Part::of(&b_src).rows(if tb { 0..n } else { 1..2 + k }).rows(if tb { 0..n } else { 1..1 + k });
                        if tb {
                            b = b.t();
                        }
                        let before = random(&mut rng, m + 3, n + 1);
                        let mut c = before.clone();
                        into_with(backend, &mut c, (2, 1), accumulate, 0.5, a.clone(), b.clone());
                        for i in 0..m + 3 {
                            for j in 0..n + 1 {
                                let inside = (2..2 + m).contains(&i) && (1..1 + n).contains(&j);
                                let expected = match inside {
                                    false => before[(i, j)],
                                    true => {
                                        // From the sources and the offsets, not from the blocks.
                                        let a_at = |i: usize, l: usize| if ta { a_src[(2 + l, 1 + i)] } else { a_src[(2 + i, 1 + l)] };
                                        let b_at = |l: usize, j: usize| if tb { b_src[(j, l)] } else { b_src[(2 + l, j)] };
                                        let dot: f64 = (0..k).map(|l| a_at(i - 2, l) * b_at(l, j - 1)).sum();
                                        0.5 * dot + if accumulate { before[(i, j)] } else { 0.0 }
                                    }
                                };
                                assert!((c[(i, j)] - expected).abs() < 1e-12, "{backend:?} {m}x{k}x{n} {ta} {tb} {accumulate} at ({i}, {j})");
                            }
                        }
                    }
                }
            }
        }
    }
}
