//! Images as pictures: grey and diverging colour maps, and PNG encoding.
//!
//! These only change how numbers look, never the numbers. Output buffers
//! are RGBA8, row-major, 4 bytes per pixel, alpha always 255.

use crate::stack::Image;

/// Lower and upper percentiles of the automatic grey stretch.
const STRETCH_LOW: f64 = 0.5;
const STRETCH_HIGH: f64 = 99.5;

/// Colour of the most negative residuals: a deep blue, sRGB (40, 90, 175),
/// CIELAB lightness L* ≈ 39. Chosen for this project.
pub const NEGATIVE_END: [u8; 3] = [40, 90, 175];
/// Colour of the most positive residuals: a deep red, sRGB (178, 34, 40),
/// L* ≈ 39, the same lightness as [`NEGATIVE_END`] so that residuals of equal
/// size look equally strong whatever their sign. Chosen for this project.
pub const POSITIVE_END: [u8; 3] = [178, 34, 40];
/// Steps of the colour ramp from white to each end colour.
const RAMP_STEPS: usize = 255;

/// The `p`-th percentile (`0 ≤ p ≤ 100`) of `values`, linear interpolation
/// between order statistics at rank `h = (n − 1) p / 100` (the default
/// method of NumPy's `percentile`). Reorders `values`; `None` if empty.
fn percentile(values: &mut [f64], p: f64) -> Option<f64> {
    if values.is_empty() {
        return None;
    }
    let h = (values.len() - 1) as f64 * p / 100.0;
    let k = h.floor() as usize;
    percentile_at_rank(values, k, h - k as f64)
}

/// Values from which [`percentile_of`] samples (below it selects among all).
const SAMPLED_FROM: usize = 1 << 16;
/// Size of [`percentile_of`]'s sample.
const SAMPLE: usize = 1 << 14;

/// [`percentile`] of `values` (not reordered), the same number, without a
/// selection among all of them: the two order statistics it interpolates,
/// of ranks `k` and `k + 1`, lie in a window `[a, b]` of values whose ends
/// are order statistics of a pseudo-random sample of `SAMPLE` values, `SPREAD`
/// standard deviations of the sample rank (at most `√SAMPLE / 2`) either
/// side of rank `k`'s expected place in it. One pass counts the values
/// below `a` and collects those in the window (about 5% of them); rank
/// `k` overall is then rank `k − below` among those. When the window misses
/// a rank (the sample was unlucky) or there are few values, the selection
/// among all. Values are ordered by `total_cmp`, as in [`percentile`], so
/// ties and signed zeros fall the same way. On a 1024 x 1024 picture about
/// 3 times faster here (one run).
fn percentile_of(values: &[f64], p: f64) -> Option<f64> {
    match values.len() < SAMPLED_FROM {
        true => percentile(&mut values.to_vec(), p),
        false => windowed_percentile(values, p, SAMPLE, SPREAD).0,
    }
}

/// Half-width of [`percentile_of`]'s window in standard deviations of the
/// sample rank.
const SPREAD: f64 = 6.0;

/// [`percentile_of`]'s way with a sample of `sample` values and a window
/// `spread` standard deviations (`√sample / 2`) either side, plus two
/// sample ranks; also says whether the window held both ranks (else the
/// selection among all gave the value).
fn windowed_percentile(values: &[f64], p: f64, sample: usize, spread: f64) -> (Option<f64>, bool) {
    let n = values.len();
    if n == 0 || sample == 0 {
        return (percentile(&mut values.to_vec(), p), false);
    }
    let h = (n - 1) as f64 * p / 100.0;
    let k = h.floor() as usize;
    let mut rng = crate::prng::SplitMix64(0x00b1_75a9);
    let mut drawn: Vec<f64> = (0..sample).map(|_| values[(rng.next_u64() % n as u64) as usize]).collect();
    let centre = (k as f64 + 0.5) * sample as f64 / n as f64;
    let margin = spread * (sample as f64).sqrt() / 2.0 + 2.0;
    let mut end = |rank: f64| -> Option<f64> {
        (rank >= 0.0 && rank < sample as f64).then(|| *drawn.select_nth_unstable_by(rank as usize, f64::total_cmp).1)
    };
    let (a, b) = (end((centre - margin).floor()), end((centre + margin).ceil()));
    match percentile_in_window(values, p, a, b) {
        Some(v) => (Some(v), true),
        None => (percentile(&mut values.to_vec(), p), false),
    }
}

/// [`percentile`] of the non-empty `values`, from the count of those below
/// `a` and a selection among those in the window `[a, b]` (`None`: no
/// bound on that side); `None` when the window does not hold both ranks
/// it interpolates.
fn percentile_in_window(values: &[f64], p: f64, a: Option<f64>, b: Option<f64>) -> Option<f64> {
    use std::cmp::Ordering::{Greater, Less};
    let n = values.len();
    let h = (n - 1) as f64 * p / 100.0;
    let k = h.floor() as usize;
    let mut below = 0;
    let mut window = Vec::new();
    for &v in values {
        if a.is_some_and(|a| v.total_cmp(&a) == Less) {
            below += 1;
        } else if b.is_none_or(|b| v.total_cmp(&b) != Greater) {
            window.push(v);
        }
    }
    // Rank k + 1 is needed unless k is the last rank.
    let needed = if k + 1 < n { k + 2 } else { k + 1 };
    if below > k || below + window.len() < needed {
        return None;
    }
    percentile_at_rank(&mut window, k - below, h - k as f64)
}

/// `below + frac (next − below)` for the order statistics of ranks `k` and
/// `k + 1` of `values` (`next = below` when `k` is the last): the
/// interpolation of [`percentile`]. Reorders `values`.
fn percentile_at_rank(values: &mut [f64], k: usize, frac: f64) -> Option<f64> {
    let (_, &mut below, above) = values.select_nth_unstable_by(k, f64::total_cmp);
    let next = above.iter().copied().min_by(f64::total_cmp).unwrap_or(below);
    Some(below + frac * (next - below))
}

/// The finite pixel values of `image` (the pixels themselves when all are).
fn finite_values(image: &Image) -> std::borrow::Cow<'_, [f64]> {
    match image.pixels.iter().all(|v| v.is_finite()) {
        true => std::borrow::Cow::Borrowed(&image.pixels),
        false => std::borrow::Cow::Owned(image.pixels.iter().copied().filter(|v| v.is_finite()).collect()),
    }
}

/// Grey picture with an automatic contrast stretch: the 0.5th percentile
/// `lo` maps to 0 and the 99.5th percentile `hi` to 255,
/// `grey = round(255 (v − lo) / (hi − lo))` clamped to 0..=255. A constant
/// image (`hi = lo`) is mid grey 128; non-finite pixels are black and are
/// left out of the percentiles.
pub fn grey_rgba(image: &Image) -> Vec<u8> {
    let values = finite_values(image);
    let lo = percentile_of(&values, STRETCH_LOW);
    let hi = percentile_of(&values, STRETCH_HIGH);
    let range = match (lo, hi) {
        (Some(lo), Some(hi)) if hi > lo => Some((lo, hi - lo)),
        _ => None,
    };
    let mut out = vec![255; 4 * image.pixels.len()];
    for (px, &v) in out.chunks_exact_mut(4).zip(&image.pixels) {
        let grey = match range {
            _ if !v.is_finite() => 0,
            Some((lo, span)) => round_unit((255.0 * (v - lo) / span).clamp(0.0, 255.0)),
            None => 128,
        };
        px[..3].fill(grey);
    }
    out
}

/// `x.round() as u8` for `0 ≤ x ≤ 255` (halves away from zero) by
/// truncating `x + 0.5`: `round` is a library call per pixel in both the
/// native and the WebAssembly build (whose own rounding instruction rounds
/// halves to even), the truncation one instruction.
fn round_unit(x: f64) -> u8 {
    (x + 0.5) as u8
}

/// Residual picture on a diverging scale symmetric about zero: with `s` the
/// 99.5th percentile of `|v|`, `t = clamp(v / s, −1, 1)`; `t = 0` is white,
/// `t = −1` is [`NEGATIVE_END`] (blue), `t = 1` is [`POSITIVE_END`] (red).
/// Between them the colour moves along a straight line in CIELAB from white
/// to the end colour, so lightness falls evenly with `|t|` (the ramp is
/// sampled in 255 steps per side). If `s = 0` every non-zero pixel gets the
/// full colour of its sign. Non-finite pixels are white.
pub fn diverging_rgba(image: &Image) -> Vec<u8> {
    let magnitudes: Vec<f64> = finite_values(image).iter().map(|v| v.abs()).collect();
    let scale = percentile_of(&magnitudes, STRETCH_HIGH).unwrap_or(0.0);
    let negative = colour_ramp(NEGATIVE_END);
    let positive = colour_ramp(POSITIVE_END);
    let mut out = vec![255; 4 * image.pixels.len()];
    for (px, &v) in out.chunks_exact_mut(4).zip(&image.pixels) {
        let t = if !v.is_finite() {
            0.0
        } else if scale > 0.0 {
            (v / scale).clamp(-1.0, 1.0)
        } else {
            match v.partial_cmp(&0.0) {
                Some(std::cmp::Ordering::Greater) => 1.0,
                Some(std::cmp::Ordering::Less) => -1.0,
                _ => 0.0,
            }
        };
        let step = round_unit(t.abs() * RAMP_STEPS as f64) as usize;
        px[..3].copy_from_slice(if t < 0.0 { &negative[step] } else { &positive[step] });
    }
    out
}

/// `RAMP_STEPS + 1` colours from white (step 0) to `end` (last step),
/// evenly spaced along the CIELAB line between them.
fn colour_ramp(end: [u8; 3]) -> Vec<[u8; 3]> {
    let white = srgb_to_lab([255, 255, 255]);
    let far = srgb_to_lab(end);
    (0..=RAMP_STEPS)
        .map(|k| {
            let s = k as f64 / RAMP_STEPS as f64;
            lab_to_srgb([0, 1, 2].map(|i| white[i] + s * (far[i] - white[i])))
        })
        .collect()
}

// sRGB (IEC 61966-2-1) with the D65 white point; CIE 1976 L*a*b*.
const RGB_TO_XYZ: [[f64; 3]; 3] = [
    [0.4124564, 0.3575761, 0.1804375],
    [0.2126729, 0.7151522, 0.0721750],
    [0.0193339, 0.1191920, 0.9503041],
];
const XYZ_TO_RGB: [[f64; 3]; 3] = [
    [3.2404542, -1.5371385, -0.4985314],
    [-0.9692660, 1.8760108, 0.0415560],
    [0.0556434, -0.2040259, 1.0572252],
];
/// The white point: the XYZ of sRGB white (1, 1, 1) under [`RGB_TO_XYZ`].
fn white_xyz() -> [f64; 3] {
    RGB_TO_XYZ.map(|row| row.iter().sum())
}
const LAB_EPSILON: f64 = 216.0 / 24389.0;
const LAB_KAPPA: f64 = 24389.0 / 27.0;

fn srgb_to_lab(rgb: [u8; 3]) -> [f64; 3] {
    let linear = rgb.map(|c| {
        let c = f64::from(c) / 255.0;
        if c <= 0.04045 {
            c / 12.92
        } else {
            ((c + 0.055) / 1.055).powf(2.4)
        }
    });
    let white = white_xyz();
    let f = [0, 1, 2].map(|i| {
        let r = (0..3).map(|j| RGB_TO_XYZ[i][j] * linear[j]).sum::<f64>() / white[i];
        if r > LAB_EPSILON {
            r.cbrt()
        } else {
            (LAB_KAPPA * r + 16.0) / 116.0
        }
    });
    [116.0 * f[1] - 16.0, 500.0 * (f[0] - f[1]), 200.0 * (f[1] - f[2])]
}

fn lab_to_srgb(lab: [f64; 3]) -> [u8; 3] {
    let fy = (lab[0] + 16.0) / 116.0;
    let f = [fy + lab[1] / 500.0, fy, fy - lab[2] / 200.0];
    let white = white_xyz();
    let xyz = [0, 1, 2].map(|i| {
        let r = if f[i].powi(3) > LAB_EPSILON { f[i].powi(3) } else { (116.0 * f[i] - 16.0) / LAB_KAPPA };
        r * white[i]
    });
    [0, 1, 2].map(|i| {
        let c = (0..3).map(|j| XYZ_TO_RGB[i][j] * xyz[j]).sum::<f64>().clamp(0.0, 1.0);
        let encoded = if c <= 0.0031308 { 12.92 * c } else { 1.055 * c.powf(1.0 / 2.4) - 0.055 };
        (255.0 * encoded).round().clamp(0.0, 255.0) as u8
    })
}

/// Encodes an RGBA8 buffer (row-major, `4 * height * width` bytes) as a PNG
/// file.
///
/// # Panics
/// If `rgba.len() != 4 * height * width`, a side is 0 or larger than
/// `u32::MAX`: all bugs in the caller, since pictures come from images.
pub fn png_rgba(height: usize, width: usize, rgba: &[u8]) -> Vec<u8> {
    use image::ImageEncoder;
    assert_eq!(rgba.len(), 4 * height * width, "png_rgba: buffer is not 4 * {height} * {width} bytes");
    let (h, w) = (u32::try_from(height).expect("height fits u32"), u32::try_from(width).expect("width fits u32"));
    let mut out = Vec::new();
    image::codecs::png::PngEncoder::new(&mut out)
        .write_image(rgba, w, h, image::ExtendedColorType::Rgba8)
        .expect("encoding a PNG into memory fails only for an empty image");
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    fn pixel(rgba: &[u8], i: usize) -> [u8; 4] {
        [rgba[4 * i], rgba[4 * i + 1], rgba[4 * i + 2], rgba[4 * i + 3]]
    }

    #[test]
    fn percentile_matches_numpy_linear_method() {
        // np.percentile([3, 1, 4, 1, 5, 9, 2, 6], [0.5, 50, 99.5]) = [1, 3.5, 8.895]
        // (NumPy 2.4.6, default method "linear"; run for this test).
        let data = [3.0, 1.0, 4.0, 1.0, 5.0, 9.0, 2.0, 6.0];
        for (p, want) in [(0.5, 1.0), (50.0, 3.5), (99.5, 8.895)] {
            let got = percentile(&mut data.clone(), p).unwrap();
            assert!((got - want).abs() < 1e-12, "p{p}: {got}");
        }
        assert_eq!(percentile(&mut [], 50.0), None);
    }

    /// The windowed percentile is the selection among all, bit for bit, on
    /// normal noise, heavy ties, a periodic pattern, signed zeros, sorted
    /// and constant values; with the default sample the window holds the
    /// ranks on the noise, and tiny samples (windows that miss) still give
    /// the same numbers.
    #[test]
    fn windowed_percentile_equals_the_selection_among_all() {
        let mut rng = crate::prng::SplitMix64(11);
        let n = 3 * SAMPLED_FROM + 17;
        let noise: Vec<f64> = (0..n).map(|_| rng.normal()).collect();
        let ties: Vec<f64> = (0..n).map(|_| (rng.next_u64() % 5) as f64).collect();
        let periodic: Vec<f64> = (0..n).map(|i| ((i % 64) as f64 * 0.3).sin()).collect();
        let zeros: Vec<f64> = (0..n).map(|i| [0.0, -0.0, 1.0, -1.0][(i * 7 + i / 3) % 4]).collect();
        let sorted: Vec<f64> = (0..n).map(|i| i as f64 / 7.0).collect();
        let constant = vec![2.5; n];
        for (name, values) in [("noise", &noise), ("ties", &ties), ("periodic", &periodic), ("zeros", &zeros), ("sorted", &sorted), ("constant", &constant)] {
            for p in [0.0, 0.5, 37.2, 50.0, 99.5, 100.0] {
                let want = percentile(&mut values.clone(), p).unwrap();
                let (got, windowed) = windowed_percentile(values, p, SAMPLE, SPREAD);
                assert_eq!(got.map(f64::to_bits), Some(want.to_bits()), "{name} p{p}: {got:?} vs {want}");
                if name == "noise" {
                    assert!(windowed, "{name} p{p}: the window missed");
                }
                // Tiny samples and narrow windows: ranks at the window's
                // edges, and misses.
                for (sample, spread) in [(1, SPREAD), (3, SPREAD), (SAMPLE, 0.0), (SAMPLE, 0.3), (4096, 0.0)] {
                    let (got, _) = windowed_percentile(values, p, sample, spread);
                    assert_eq!(got.map(f64::to_bits), Some(want.to_bits()), "{name} p{p} sample {sample} spread {spread}");
                }
            }
        }
        assert_eq!(windowed_percentile(&[], 50.0, SAMPLE, SPREAD).0, None);
        assert_eq!(percentile_of(&noise, 99.5), percentile(&mut noise.clone(), 99.5));
    }

    /// Every window of a small array with ties and signed zeros: either it
    /// misses (and says so) or gives the selection's number bit for bit, and
    /// it holds the ranks exactly when its ends bracket them.
    #[test]
    fn every_window_gives_the_percentile_or_says_it_missed() {
        let mut rng = crate::prng::SplitMix64(5);
        let values: Vec<f64> = (0..23).map(|_| [3.0, -1.0, 0.0, -0.0, 2.0, 3.0, 7.5][(rng.next_u64() % 7) as usize]).collect();
        let mut ends: Vec<Option<f64>> = values.iter().map(|&v| Some(v)).collect();
        ends.push(None);
        let mut sorted = values.clone();
        sorted.sort_by(f64::total_cmp);
        for p in (0..=40).map(|i| i as f64 * 2.5) {
            let want = percentile(&mut values.clone(), p).unwrap();
            let h = (values.len() - 1) as f64 * p / 100.0;
            let k = h.floor() as usize;
            let (low, high) = (sorted[k], sorted[(k + 1).min(values.len() - 1)]);
            for &a in &ends {
                for &b in &ends {
                    let got = percentile_in_window(&values, p, a, b);
                    let holds = a.is_none_or(|a| a.total_cmp(&low).is_le()) && b.is_none_or(|b| b.total_cmp(&high).is_ge());
                    assert_eq!(got.is_some(), holds, "p{p} window {a:?}..{b:?}");
                    if let Some(got) = got {
                        assert_eq!(got.to_bits(), want.to_bits(), "p{p} window {a:?}..{b:?}");
                    }
                }
            }
        }
    }

    #[test]
    fn stretch_maps_the_percentiles_to_black_and_white() {
        // Values 0..=200: np.percentile(np.arange(201), [0.5, 99.5]) = [1, 199]
        // (NumPy 2.4.6, run for this test).
        let image = Image::new(1, 201, (0..=200).map(f64::from).collect());
        let rgba = grey_rgba(&image);
        assert_eq!(rgba.len(), 4 * 201);
        assert_eq!(pixel(&rgba, 1), [0, 0, 0, 255]);
        assert_eq!(pixel(&rgba, 199), [255, 255, 255, 255]);
        assert_eq!(pixel(&rgba, 0), [0, 0, 0, 255]);
        assert_eq!(pixel(&rgba, 200), [255, 255, 255, 255]);
        // 100 sits at 99/198 = 1/2 of the range: 127.5 rounds to 128.
        assert_eq!(pixel(&rgba, 100), [128, 128, 128, 255]);
        // 50 sits at 49/198 of the range: 63.1 rounds to 63.
        assert_eq!(pixel(&rgba, 50)[0], 63);
    }

    #[test]
    fn constant_image_is_mid_grey() {
        let rgba = grey_rgba(&Image::new(2, 2, vec![0.7; 4]));
        assert_eq!(rgba, [128, 128, 128, 255].repeat(4));
    }

    #[test]
    fn zero_residual_is_white_and_sign_picks_the_hue() {
        let image = Image::new(1, 5, vec![0.0, 1.0, -1.0, 0.5, -0.5]);
        let rgba = diverging_rgba(&image);
        assert_eq!(pixel(&rgba, 0), [255, 255, 255, 255]);
        // The 99.5th percentile of |v| here is 1, so ±1 reach the end colours.
        let [r, g, b] = POSITIVE_END;
        assert_eq!(pixel(&rgba, 1), [r, g, b, 255]);
        let [r, g, b] = NEGATIVE_END;
        assert_eq!(pixel(&rgba, 2), [r, g, b, 255]);
        let half_pos = pixel(&rgba, 3);
        let half_neg = pixel(&rgba, 4);
        assert!(half_pos[0] > half_pos[2], "positive is reddish: {half_pos:?}");
        assert!(half_neg[2] > half_neg[0], "negative is bluish: {half_neg:?}");
        // Halfway is lighter than the end and darker than white.
        let sum = |p: [u8; 4]| u32::from(p[0]) + u32::from(p[1]) + u32::from(p[2]);
        assert!(sum(half_pos) > sum(pixel(&rgba, 1)) && sum(half_pos) < 765);
        assert!(sum(half_neg) > sum(pixel(&rgba, 2)) && sum(half_neg) < 765);
    }

    #[test]
    fn ramp_lightness_falls_evenly_to_the_end_colours() {
        // Both ends were chosen with L* ≈ 39, and the ramp is linear in L*.
        for end in [NEGATIVE_END, POSITIVE_END] {
            let l_end = srgb_to_lab(end)[0];
            assert!((l_end - 39.25).abs() < 0.5, "{end:?}: L* = {l_end}");
            let ramp = colour_ramp(end);
            assert_eq!(ramp[0], [255, 255, 255]);
            assert_eq!(ramp[RAMP_STEPS], end);
            let mid = srgb_to_lab(ramp[RAMP_STEPS / 2 + 1])[0];
            let want = 100.0 + (128.0 / 255.0) * (l_end - 100.0);
            assert!((mid - want).abs() < 1.0, "{end:?}: mid L* {mid} vs {want}");
        }
    }

    #[test]
    fn scale_is_the_995th_percentile_of_magnitude() {
        // 1000 pixels of ±0.1 and one outlier of 50: the scale stays near 0.1,
        // so the small residuals get the full colour and the outlier clips.
        let mut px = vec![0.1; 1000];
        px[3] = -0.1;
        px.push(50.0);
        let rgba = diverging_rgba(&Image::new(1, 1001, px));
        let [r, g, b] = POSITIVE_END;
        assert_eq!(pixel(&rgba, 0), [r, g, b, 255]);
        assert_eq!(pixel(&rgba, 1000), [r, g, b, 255]);
        let [r, g, b] = NEGATIVE_END;
        assert_eq!(pixel(&rgba, 3), [r, g, b, 255]);
    }

    #[test]
    fn all_zero_residual_is_all_white() {
        assert_eq!(diverging_rgba(&Image::zeros(2, 3)), [255u8; 24].to_vec());
    }

    #[test]
    fn png_decodes_back_to_the_same_rgba() {
        let (height, width) = (3, 5);
        let rgba: Vec<u8> = (0..4 * height * width).map(|i| (i * 37 % 256) as u8).collect();
        let png = png_rgba(height, width, &rgba);
        let back = image::load_from_memory_with_format(&png, image::ImageFormat::Png).unwrap();
        assert_eq!((back.height(), back.width()), (3, 5));
        assert_eq!(back.color(), image::ColorType::Rgba8);
        assert_eq!(back.to_rgba8().into_raw(), rgba);
    }
}
