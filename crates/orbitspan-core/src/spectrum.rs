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

/// Forward unnormalised 2-D DFT of a complex row-major `n1 x n2` array, in place.
pub fn fft2_in_place(data: &mut [Complex64], n1: usize, n2: usize, inverse: bool) {
    assert_eq!(data.len(), n1 * n2);
    let (row, col) = PLANNER.with(|planner| {
        let mut planner = planner.borrow_mut();
        if inverse {
            (planner.plan_fft_inverse(n2), planner.plan_fft_inverse(n1))
        } else {
            (planner.plan_fft_forward(n2), planner.plan_fft_forward(n1))
        }
    });
    row.process(data);
    let mut column = vec![Complex64::new(0.0, 0.0); n1];
    for c in 0..n2 {
        for r in 0..n1 {
            column[r] = data[r * n2 + c];
        }
        col.process(&mut column);
        for r in 0..n1 {
            data[r * n2 + c] = column[r];
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
        for (n1, n2) in [(1, 1), (4, 6), (7, 5), (12, 12), (9, 16)] {
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
}
