//! The 2-D discrete Fourier transform on the torus (MATH.md §4).
//!
//! `f̂(ξ) = Σ_x f(x) e^{−2πi (ξ1 x1/n1 + ξ2 x2/n2)}` (unnormalised forward),
//! inverse `f(x) = |T|⁻¹ Σ_ξ f̂(ξ) e^{+2πi ξ·x/n}`; Parseval
//! `Σ_x |f|² = |T|⁻¹ Σ_ξ |f̂|²`. Arrays are row-major, `ξ1` the row.
//! [`dft2_naive`] is the slow obvious reference for [`fft2`].

use crate::stack::Image;
use num_complex::Complex64;
use rustfft::FftPlanner;

thread_local! {
    /// Per thread, one planner: it keeps the plans (twiddle factors) of the
    /// sizes already used, so a stack of equally sized images plans once.
    static PLANNER: std::cell::RefCell<FftPlanner<f64>> = std::cell::RefCell::new(FftPlanner::new());
}

/// Columns transformed together: gathered into a contiguous buffer, so each
/// row of the array is read and written a few whole cache lines at a time
/// instead of one element per line (common practice for row-major 2-D FFTs).
const COLUMN_BLOCK: usize = 16;

/// Forward unnormalised 2-D DFT of a complex row-major `n1 x n2` array, in place.
///
/// Rows first (one batched call), then columns in blocks of
/// [`COLUMN_BLOCK`] ([`transform_columns`]).
pub fn fft2_in_place(data: &mut [Complex64], n1: usize, n2: usize, inverse: bool) {
    assert_eq!(data.len(), n1 * n2);
    if data.is_empty() {
        return;
    }
    let (row, col) = PLANNER.with(|planner| {
        let mut planner = planner.borrow_mut();
        if inverse {
            (planner.plan_fft_inverse(n2), planner.plan_fft_inverse(n1))
        } else {
            (planner.plan_fft_forward(n2), planner.plan_fft_forward(n1))
        }
    });
    let mut scratch = vec![Complex64::new(0.0, 0.0); row.get_inplace_scratch_len().max(col.get_inplace_scratch_len())];
    row.process_with_scratch(data, &mut scratch);
    transform_columns(data, n1, n2, col.as_ref(), &mut scratch);
}

/// Transforms every column of the row-major `n1 x width` array `data` by
/// `col` (length `n1`), in blocks of [`COLUMN_BLOCK`] columns: gathered
/// into `block[b·n1 + r]`, transformed as one batch, scattered back.
fn transform_columns(data: &mut [Complex64], n1: usize, width: usize, col: &dyn rustfft::Fft<f64>, scratch: &mut [Complex64]) {
    let mut block = vec![Complex64::new(0.0, 0.0); n1 * COLUMN_BLOCK.min(width)];
    for c0 in (0..width).step_by(COLUMN_BLOCK) {
        let cols = COLUMN_BLOCK.min(width - c0);
        let block = &mut block[..n1 * cols];
        for r in 0..n1 {
            for (b, &z) in data[r * width + c0..r * width + c0 + cols].iter().enumerate() {
                block[b * n1 + r] = z;
            }
        }
        col.process_with_scratch(block, scratch);
        for r in 0..n1 {
            for (b, z) in data[r * width + c0..r * width + c0 + cols].iter_mut().enumerate() {
                *z = block[b * n1 + r];
            }
        }
    }
}

/// The spectra of two real images of one size from one complex transform
/// (common practice; e.g. Press et al., Numerical Recipes, "FFT of two
/// real functions simultaneously", §12.3 in the second edition, section
/// number from memory). With `z = a + i b`,
/// `â(ξ) = (ẑ(ξ) + conj ẑ(−ξ)) / 2` and `b̂(ξ) = (ẑ(ξ) − conj ẑ(−ξ)) / 2i`.
/// Both are Hermitian (`â(−ξ) = conj â(ξ)`), so one array holds both: for
/// `ξ` before `−ξ` in row-major order, `â(ξ)` at `ξ` and `b̂(ξ)` at `−ξ`;
/// at a frequency equal to its own negative, `â` and `b̂` are real and sit
/// as the real and imaginary parts.
pub struct PackedPair {
    data: Vec<Complex64>,
    n1: usize,
    n2: usize,
    second: bool,
}

/// The row-major index of `−ξ` for `ξ` at index `idx` on an `n1 x n2` torus.
pub(crate) fn negative_index(idx: usize, n1: usize, n2: usize) -> usize {
    let (r, c) = (idx / n2, idx % n2);
    ((n1 - r) % n1) * n2 + (n2 - c) % n2
}

/// Every `(idx, negative_index(idx))` in row-major order, without divisions.
fn with_negatives(n1: usize, n2: usize) -> impl Iterator<Item = (usize, usize)> {
    (0..n1).flat_map(move |r| {
        let nr = (n1 - r) % n1;
        (0..n2).map(move |c| (r * n2 + c, nr * n2 + (n2 - c) % n2))
    })
}

impl PackedPair {
    /// Transforms `a` (and `b`, when given: same size) moved so that pixel
    /// `origin` sits at (0, 0): `a'(x) = a(x + origin)`, indices mod the size.
    pub fn transform(a: &Image, b: Option<&Image>, origin: [usize; 2]) -> PackedPair {
        let (n1, n2) = (a.height, a.width);
        if let Some(b) = b {
            assert_eq!((b.height, b.width), (n1, n2), "images of one pair differ in size");
        }
        let mut data = Vec::with_capacity(n1 * n2);
        let o1 = if n2 == 0 { 0 } else { origin[1] % n2 };
        // Row `src` of `img`, starting at column `o1` and wrapping around.
        fn rotated_row(img: &Image, src: usize, o1: usize) -> impl Iterator<Item = f64> + '_ {
            let row = &img.pixels[src * img.width..(src + 1) * img.width];
            row[o1..].iter().chain(&row[..o1]).copied()
        }
        for r in 0..n1 {
            let src = (r + origin[0]) % n1;
            let shifted = |img| rotated_row(img, src, o1);
            match b {
                Some(b) => data.extend(shifted(a).zip(shifted(b)).map(|(x, y)| Complex64::new(x, y))),
                None => data.extend(shifted(a).map(|x| Complex64::new(x, 0.0))),
            }
        }
        fft2_in_place(&mut data, n1, n2, false);
        if b.is_some() {
            for (idx, j) in with_negatives(n1, n2) {
                if idx < j {
                    let (zk, zm) = (data[idx], data[j].conj());
                    data[idx] = (zk + zm) * 0.5;
                    data[j] = Complex64::new((zk - zm).im * 0.5, -(zk - zm).re * 0.5);
                }
            }
        }
        PackedPair { data, n1, n2, second: b.is_some() }
    }

    /// The first image's spectrum, in the pair's own buffer when there is
    /// no second image.
    pub fn into_first(self) -> Vec<Complex64> {
        if !self.second {
            return self.data;
        }
        let mut out = vec![Complex64::new(0.0, 0.0); self.data.len()];
        self.first_into(&mut out);
        out
    }

    /// Whether the pair holds a second image.
    pub fn has_second(&self) -> bool {
        self.second
    }

    /// The first image's spectrum at row-major index `i`; `j` is the index
    /// of `−ξ` ([`negative_index`], passed in so that callers reading many
    /// values can find it without a division each).
    pub fn first_at(&self, i: usize, j: usize) -> Complex64 {
        if !self.second {
            return self.data[i];
        }
        match i.cmp(&j) {
            std::cmp::Ordering::Less => self.data[i],
            std::cmp::Ordering::Greater => self.data[j].conj(),
            std::cmp::Ordering::Equal => Complex64::new(self.data[i].re, 0.0),
        }
    }

    /// The second image's spectrum at index `i` (`j` as for
    /// [`PackedPair::first_at`]); zero when there is no second image.
    pub fn second_at(&self, i: usize, j: usize) -> Complex64 {
        if !self.second {
            return Complex64::new(0.0, 0.0);
        }
        match i.cmp(&j) {
            std::cmp::Ordering::Less => self.data[j],
            std::cmp::Ordering::Greater => self.data[i].conj(),
            std::cmp::Ordering::Equal => Complex64::new(self.data[i].im, 0.0),
        }
    }

    /// The first image's spectrum, written into `out` (length `n1 n2`).
    pub fn first_into(&self, out: &mut [Complex64]) {
        for (i, j) in with_negatives(self.n1, self.n2) {
            out[i] = self.first_at(i, j);
        }
    }

    /// The second image's spectrum (zero when there is none).
    pub fn second_into(&self, out: &mut [Complex64]) {
        for (i, j) in with_negatives(self.n1, self.n2) {
            out[i] = self.second_at(i, j);
        }
    }

    /// Adds both images' `|f̂(ξ)|²` to `power[ξ]`.
    pub fn add_power(&self, power: &mut [f64]) {
        if !self.second {
            for (p, z) in power.iter_mut().zip(&self.data) {
                *p += z.norm_sqr();
            }
            return;
        }
        for (idx, j) in with_negatives(self.n1, self.n2) {
            if idx < j {
                let both = self.data[idx].norm_sqr() + self.data[j].norm_sqr();
                power[idx] += both;
                power[j] += both;
            } else if idx == j {
                power[idx] += self.data[idx].norm_sqr();
            }
        }
    }
}

/// `f̂` of a real image, row-major, unnormalised.
pub fn fft2(image: &Image) -> Vec<Complex64> {
    let mut data: Vec<Complex64> = image.pixels.iter().map(|&v| Complex64::new(v, 0.0)).collect();
    fft2_in_place(&mut data, image.height, image.width, false);
    data
}

/// The inverse transform `|T|⁻¹ Σ_ξ f̂(ξ) e^{+2πi ξ·x/n}`, returning the real
/// part and the largest imaginary part seen (a check for conjugate symmetry).
pub fn ifft2_real(spectrum: &[Complex64], n1: usize, n2: usize) -> (Image, f64) {
    ifft2_real_owned(spectrum.to_vec(), n1, n2)
}

/// [`ifft2_real`] transforming the given spectrum in place (no copy).
pub fn ifft2_real_owned(mut data: Vec<Complex64>, n1: usize, n2: usize) -> (Image, f64) {
    fft2_in_place(&mut data, n1, n2, true);
    let scale = 1.0 / (n1 * n2) as f64;
    let max_imag = data.iter().fold(0.0f64, |m, z| m.max((z.im * scale).abs()));
    let pixels = data.iter().map(|z| z.re * scale).collect();
    (Image::new(n1, n2, pixels), max_imag)
}

/// Columns kept of a real image's spectrum, `ξ2 = 0..=n2/2`: the others
/// are conjugates, `f̂(ξ1, ξ2) = conj f̂(−ξ1, −ξ2)`.
pub fn half_width(n2: usize) -> usize {
    n2 / 2 + 1
}

/// The inverse transform of a real image from its half spectrum (row-major
/// `n1 x half_width(n2)`, the columns `ξ2 = 0..=n2/2`), consumed: about half
/// the work and memory of [`ifft2_real`] on the whole spectrum.
///
/// The missing columns are taken as conjugates, and on the columns that
/// are their own negatives (`ξ2 = 0` and, for even `n2`, `n2/2`) the
/// Hermitian part `(f̂(ξ) + conj f̂(−ξ)) / 2` is used, so the result is the
/// real part of the inverse transform of the conjugate-symmetric extension
/// (what [`ifft2_real`] returns for it; the tests check exactly that).
///
/// Columns first: the inverse along `ξ1` of each kept column gives, per
/// row `x1`, the 1-D half spectrum `g(ξ2)` of that real row. Then rows two
/// at a time as one complex inverse of length `n2` of `z = g_a + i g_b`
/// (extended by `g(n2 − ξ2) = conj g(ξ2)`): its real part is row `a`, its
/// imaginary part row `b` (the two-real-functions trick of
/// [`PackedPair`], backwards, within one image).
pub fn ifft2_half_real(mut half: Vec<Complex64>, n1: usize, n2: usize) -> Image {
    let h2 = half_width(n2);
    assert_eq!(half.len(), n1 * h2, "a half spectrum of {n1}x{n2} has {n1}x{h2} values");
    let self_conjugate = |c: usize| (n2 - c) % n2 == c;
    for c in (0..h2).filter(|&c| self_conjugate(c)) {
        for r in 0..=n1 / 2 {
            let nr = (n1 - r) % n1;
            let hermitian = (half[r * h2 + c] + half[nr * h2 + c].conj()) * 0.5;
            half[r * h2 + c] = hermitian;
            half[nr * h2 + c] = hermitian.conj();
        }
    }
    let (row, col) = PLANNER.with(|planner| {
        let mut planner = planner.borrow_mut();
        (planner.plan_fft_inverse(n2), planner.plan_fft_inverse(n1))
    });
    let mut scratch = vec![Complex64::new(0.0, 0.0); row.get_inplace_scratch_len().max(col.get_inplace_scratch_len())];
    transform_columns(&mut half, n1, h2, col.as_ref(), &mut scratch);
    let scale = 1.0 / (n1 * n2) as f64;
    let mut pixels = vec![0.0; n1 * n2];
    let mut z = vec![Complex64::new(0.0, 0.0); n2];
    let i = Complex64::new(0.0, 1.0);
    for a in (0..n1).step_by(2) {
        let ga = &half[a * h2..(a + 1) * h2];
        let gb = (a + 1 < n1).then(|| &half[(a + 1) * h2..(a + 2) * h2]);
        for c in 0..h2 {
            let (mut x, mut y) = (ga[c], gb.map_or(Complex64::new(0.0, 0.0), |g| g[c]));
            if self_conjugate(c) {
                // A real row's value there is real; what is left is round-off.
                (x, y) = (Complex64::new(x.re, 0.0), Complex64::new(y.re, 0.0));
            }
            z[c] = x + i * y;
            if c != 0 && c < n2 - c {
                z[n2 - c] = x.conj() + i * y.conj();
            }
        }
        row.process_with_scratch(&mut z, &mut scratch);
        for (x2, v) in z.iter().enumerate() {
            pixels[a * n2 + x2] = v.re * scale;
            if a + 1 < n1 {
                pixels[(a + 1) * n2 + x2] = v.im * scale;
            }
        }
    }
    Image::new(n1, n2, pixels)
}

/// The naive `O(|T|²)` DFT, straight from the definition: the reference for tests.
pub fn dft2_naive(image: &Image) -> Vec<Complex64> {
    let (n1, n2) = (image.height, image.width);
    let mut out = vec![Complex64::new(0.0, 0.0); n1 * n2];
    for k1 in 0..n1 {
        for k2 in 0..n2 {
            let mut acc = Complex64::new(0.0, 0.0);
            for x1 in 0..n1 {
                for x2 in 0..n2 {
                    let turns = ((k1 * x1) % n1) as f64 / n1 as f64 + ((k2 * x2) % n2) as f64 / n2 as f64;
                    acc += image.at(x1, x2) * Complex64::from_polar(1.0, -2.0 * std::f64::consts::PI * turns);
                }
            }
            out[k1 * n2 + k2] = acc;
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    fn test_image(n1: usize, n2: usize) -> Image {
        Image::new(n1, n2, (0..n1 * n2).map(|i| ((i * 7919) % 97) as f64 / 97.0 - 0.3).collect())
    }

    #[test]
    fn fft_matches_naive_dft() {
        // Widths beyond one block of columns, whole and partial.
        for (n1, n2) in [(1, 1), (4, 6), (7, 5), (12, 12), (9, 16), (5, 37), (3, 48), (33, 20)] {
            let img = test_image(n1, n2);
            let fast = fft2(&img);
            let slow = dft2_naive(&img);
            let err = fast.iter().zip(&slow).map(|(a, b)| (a - b).norm()).fold(0.0, f64::max);
            assert!(err < 1e-10, "{n1}x{n2}: {err}");
        }
    }

    #[test]
    fn parseval_and_inverse() {
        let img = test_image(10, 6);
        let spec = fft2(&img);
        let freq_energy: f64 = spec.iter().map(|z| z.norm_sqr()).sum::<f64>() / 60.0;
        assert!((freq_energy - img.energy()).abs() < 1e-10 * img.energy());
        let (back, imag) = ifft2_real(&spec, 10, 6);
        assert!(imag < 1e-12);
        for (a, b) in back.pixels.iter().zip(&img.pixels) {
            assert!((a - b).abs() < 1e-12);
        }
    }

    fn shifted_image(img: &Image, origin: [usize; 2]) -> Image {
        Image::new(img.height, img.width, (0..img.height * img.width).map(|i| img.at((i / img.width + origin[0]) % img.height, (i % img.width + origin[1]) % img.width)).collect())
    }

    fn max_difference(a: &[Complex64], b: &[Complex64]) -> f64 {
        assert_eq!(a.len(), b.len());
        a.iter().zip(b).map(|(x, y)| (x - y).norm()).fold(0.0, f64::max)
    }

    /// Sizes with and without frequencies equal to their own negative
    /// (even sides have them off the origin), one-pixel sides included.
    const PAIR_SIZES: [(usize, usize); 6] = [(1, 1), (1, 6), (4, 6), (7, 5), (6, 9), (8, 8)];

    #[test]
    fn packed_pairs_give_each_images_own_spectrum() {
        for (n1, n2) in PAIR_SIZES {
            let a = test_image(n1, n2);
            let b = Image::new(n1, n2, a.pixels.iter().enumerate().map(|(i, v)| (v * 3.0 + i as f64).sin()).collect());
            for origin in [[0, 0], [n1 / 2, n2 - 1]] {
                let (fa, fb) = (fft2(&shifted_image(&a, origin)), fft2(&shifted_image(&b, origin)));
                let scale = fa.iter().chain(&fb).map(|z| z.norm()).fold(0.0, f64::max);
                let packed = PackedPair::transform(&a, Some(&b), origin);
                assert!(packed.has_second());
                let mut out = vec![Complex64::new(0.0, 0.0); n1 * n2];
                packed.first_into(&mut out);
                assert!(max_difference(&out, &fa) < 1e-13 * scale, "{n1}x{n2} {origin:?}: first");
                packed.second_into(&mut out);
                assert!(max_difference(&out, &fb) < 1e-13 * scale, "{n1}x{n2} {origin:?}: second");
                let mut power = vec![0.0; n1 * n2];
                packed.add_power(&mut power);
                for (k, p) in power.iter().enumerate() {
                    let expected = fa[k].norm_sqr() + fb[k].norm_sqr();
                    assert!((p - expected).abs() < 1e-12 * scale * scale, "{n1}x{n2}: power at {k}");
                }
                // Alone: the image's own transform, bit for bit.
                let single = PackedPair::transform(&a, None, origin);
                assert!(!single.has_second());
                single.second_into(&mut out);
                assert!(out.iter().all(|z| *z == Complex64::new(0.0, 0.0)));
                assert_eq!(single.into_first(), fa, "{n1}x{n2} {origin:?}: alone");
            }
        }
    }

    /// The columns `0..=n2/2` of a row-major `n1 x n2` spectrum.
    fn half_of(full: &[Complex64], n1: usize, n2: usize) -> Vec<Complex64> {
        let h2 = half_width(n2);
        (0..n1 * h2).map(|k| full[(k / h2) * n2 + k % h2]).collect()
    }

    #[test]
    fn half_spectrum_inverse_gives_back_the_image() {
        for (n1, n2) in [(1, 1), (1, 2), (2, 1), (1, 6), (4, 6), (7, 5), (6, 9), (8, 8), (5, 37), (33, 20)] {
            let img = test_image(n1, n2);
            let back = ifft2_half_real(half_of(&fft2(&img), n1, n2), n1, n2);
            let err = back.pixels.iter().zip(&img.pixels).map(|(a, b)| (a - b).abs()).fold(0.0, f64::max);
            assert!(err < 1e-13, "{n1}x{n2}: {err}");
        }
    }

    /// Any half spectrum, Hermitian or not on the self-conjugate columns:
    /// the real part of [`ifft2_real`] (the slow reference) of its
    /// conjugate-symmetric extension.
    #[test]
    fn half_spectrum_inverse_is_the_real_part_of_the_extension() {
        let mut rng = crate::prng::SplitMix64(17);
        for (n1, n2) in [(1, 1), (1, 2), (3, 2), (4, 6), (7, 5), (6, 9), (8, 8), (5, 37)] {
            let h2 = half_width(n2);
            let half: Vec<Complex64> = (0..n1 * h2).map(|_| Complex64::new(rng.between(-1.0, 1.0), rng.between(-1.0, 1.0))).collect();
            let full: Vec<Complex64> = (0..n1 * n2)
                .map(|k| {
                    let (r, c) = (k / n2, k % n2);
                    match c < h2 {
                        true => half[r * h2 + c],
                        false => half[((n1 - r) % n1) * h2 + n2 - c].conj(),
                    }
                })
                .collect();
            let (reference, _) = ifft2_real(&full, n1, n2);
            let fast = ifft2_half_real(half, n1, n2);
            let err = fast.pixels.iter().zip(&reference.pixels).map(|(a, b)| (a - b).abs()).fold(0.0, f64::max);
            assert!(err < 1e-14, "{n1}x{n2}: {err}");
        }
    }

    #[test]
    fn negatives_by_rows_are_the_negative_frequencies() {
        for (n1, n2) in PAIR_SIZES {
            let listed: Vec<(usize, usize)> = with_negatives(n1, n2).collect();
            assert_eq!(listed.len(), n1 * n2);
            for (k, &(i, j)) in listed.iter().enumerate() {
                assert_eq!(i, k);
                assert_eq!(j, negative_index(i, n1, n2));
                // −ξ ≡ (n1 − ξ1, n2 − ξ2) mod the size, from the definition.
                let (r, c) = (i / n2, i % n2);
                assert_eq!(((r + j / n2) % n1, (c + j % n2) % n2), (0, 0), "{n1}x{n2} at {i}");
            }
        }
    }
}
