//! Invented example stacks, generated here in code, fully deterministic.
//!
//! Every random number comes from a SplitMix64 generator with a fixed seed,
//! so each call returns bit-identical images. Intensities lie in [0, 1].
//!
//! - [`woven_cloth`]: a stylised plain weave on the pixel grid, p4m about
//!   pixel (0, 0) with a 16 x 16 cell, with noise and a few flaws.
//! - [`honeycomb_lattice_coords`]: a honeycomb monolayer already sampled in
//!   lattice coordinates (axes along the two lattice vectors at 60°), p6m
//!   about the origin with a 12 x 12 sample cell, with noise and a vacancy.
//! - [`honeycomb_micrograph`]: the same kind of monolayer as a micrograph:
//!   the hexagonal lattice at 17° to the pixels with a 9.6-pixel spacing,
//!   noise and a vacancy; the lattice must be measured and resampled.

use crate::plane_group::{GroupSymbol, PlaneGroup};
use crate::settings::FitSettings;
use crate::prng::SplitMix64;
use crate::stack::Image;

/// An example stack with the settings that suit it.
#[derive(Clone, Debug)]
pub struct DemoStack {
    pub name: &'static str,
    pub description: &'static str,
    pub images: Vec<(String, Image)>,
    pub suggested: FitSettings,
    /// For stacks whose lattice is not on the pixel grid: the true lattice
    /// vectors `a1`, `a2` in pixels `(row, column)` used to make it (so
    /// detection can be checked); `suggested` then applies on the grid
    /// resampled onto that lattice.
    pub lattice: Option<[[f64; 2]; 2]>,
}

/// Both example stacks.
pub fn all() -> Vec<DemoStack> {
    vec![woven_cloth(), honeycomb_lattice_coords(), honeycomb_micrograph()]
}

/// Adds Gaussian noise of standard deviation `sigma`, clamps to [0, 1] and
/// rounds to the 16-bit levels `k / 65535`, so that a 16-bit PNG of the
/// stack holds exactly the values fitted in memory.
fn add_noise(image: &mut Image, sigma: f64, rng: &mut SplitMix64) {
    for v in &mut image.pixels {
        *v = ((*v + sigma * rng.normal()).clamp(0.0, 1.0) * 65535.0).round() / 65535.0;
    }
}

/// Signed difference `a − b` wrapped to `(−n/2, n/2]` (the torus of size `n`).
fn wrapped(a: f64, b: f64, n: usize) -> f64 {
    let n = n as f64;
    let d = (a - b).rem_euclid(n);
    if d > n / 2.0 {
        d - n
    } else {
        d
    }
}

// ---------------------------------------------------------------- woven cloth

/// Repeat of the weave in pixels along both axes (two threads each way).
pub const WEAVE_PERIOD: usize = 16;
const WOVEN_SIZE: usize = 128;
const WOVEN_IMAGES: usize = 8;
const WOVEN_NOISE: f64 = 0.02;
/// Background, thread, crossing and yarn weights of [`woven_pattern`].
const WEAVE_BACKGROUND: f64 = 0.12;
const WEAVE_THREAD: f64 = 0.30;
const WEAVE_CROSSING: f64 = 0.15;
const WEAVE_YARN: f64 = 0.04;

/// Brightness profile across a thread at integer offset `u` pixels from the
/// nearest thread centre line: `cos²(π d / 8)`, `d` the distance (0..=4) to
/// the nearest multiple of 8.
fn thread_profile(u: i64) -> f64 {
    let spacing = (WEAVE_PERIOD / 2) as i64;
    let r = u.rem_euclid(spacing);
    let d = r.min(spacing - r) as f64;
    (std::f64::consts::PI * d / spacing as f64).cos().powi(2)
}

/// Over/under sign along a line: `cos(2π d / 16)`, `d` the distance (0..=8)
/// to the nearest multiple of 16. It is ±1 on the thread centre lines,
/// alternating from one thread to the next.
fn crossing_sign(u: i64) -> f64 {
    let period = WEAVE_PERIOD as i64;
    let r = u.rem_euclid(period);
    let d = r.min(period - r) as f64;
    (2.0 * std::f64::consts::PI * d / period as f64).cos()
}

/// The flawless, noise-free woven pattern, `height x width` pixels.
///
/// Horizontal threads run along rows `8k`, vertical threads along columns
/// `8k`. With `t(u)` the thread profile and `s(u)` the over/under sign,
///
/// `I(r, c) = 0.12 + 0.30 (t(r) + t(c)) + 0.15 (s(r) t(r)) (s(c) t(c))
///            + 0.04 (s(r) + s(c)) t(r) t(c)`,
///
/// so crossings are raised and sunken in a checkerboard with period 16. The
/// last term makes the raised crossings at `(0, 0)` brighter than those at
/// `(8, 8)` (two kinds of yarn alternate), so that, unlike a plain
/// checkerboard, the pattern is not invariant under the shift `(8, 8)` and
/// its smallest lattice is the 16 x 16 square along the pixel axes.
/// A real plain weave shows the upper thread's direction at each crossing,
/// which lowers its symmetry to p4g; here raised and sunken crossings are
/// round, so the pattern has p4m symmetry about pixel (0, 0) on any torus
/// whose sides are multiples of 16: it is unchanged by `(r, c) ↦ (−c, r)`
/// and `(r, c) ↦ (r, −c)` (mod the size), exactly in floating point since
/// `t` and `s` are computed from distances to the nearest centre line.
/// Values lie in [0.12, 0.95].
pub fn woven_pattern(height: usize, width: usize) -> Image {
    let mut pixels = Vec::with_capacity(height * width);
    for r in 0..height as i64 {
        let (tr, sr) = (thread_profile(r), crossing_sign(r));
        for c in 0..width as i64 {
            let (tc, sc) = (thread_profile(c), crossing_sign(c));
            pixels.push(
                WEAVE_BACKGROUND
                    + WEAVE_THREAD * (tr + tc)
                    + WEAVE_CROSSING * ((sr * tr) * (sc * tc))
                    + WEAVE_YARN * (sr + sc) * (tr * tc),
            );
        }
    }
    Image::new(height, width, pixels)
}

/// Faults of the cloth, one kind per variant.
#[derive(Clone, Copy, Debug)]
enum Flaw {
    /// A short gap in one thread.
    BrokenThread,
    /// A dark blob.
    Stain,
    /// A thick, bright spot on one thread.
    Slub,
}

/// Which flaws each of the 8 cloth images gets (images 1, 4 and 7 are
/// flawless).
const CLOTH_FLAWS: [&[Flaw]; WOVEN_IMAGES] = [
    &[],
    &[Flaw::BrokenThread],
    &[Flaw::Stain],
    &[],
    &[Flaw::Slub],
    &[Flaw::BrokenThread, Flaw::Stain],
    &[],
    &[Flaw::Slub, Flaw::Stain],
];

/// Applies `flaw` at a place drawn from `rng`.
fn apply_flaw(image: &mut Image, flaw: Flaw, rng: &mut SplitMix64) {
    let (h, w) = (image.height, image.width);
    let threads = h.min(w) / (WEAVE_PERIOD / 2);
    // A thread: its direction, its centre line and a point along it.
    let horizontal = rng.uniform() < 0.5;
    let line = (rng.uniform() * threads as f64).floor() * (WEAVE_PERIOD / 2) as f64;
    let along_centre = rng.between(0.0, if horizontal { w } else { h } as f64);
    let blob = (rng.between(0.0, h as f64), rng.between(0.0, w as f64));
    let blob_sigma = rng.between(4.0, 7.0);
    for r in 0..h {
        for c in 0..w {
            let (across, along) = if horizontal {
                (wrapped(r as f64, line, h), wrapped(c as f64, along_centre, w))
            } else {
                (wrapped(c as f64, line, w), wrapped(r as f64, along_centre, h))
            };
            let v = &mut image.pixels[r * w + c];
            match flaw {
                Flaw::BrokenThread => {
                    // The thread is missing over about 10 pixels, with soft ends.
                    let window = if along.abs() < 6.0 { (std::f64::consts::PI * along / 12.0).cos().powi(2) } else { 0.0 };
                    let thread = if across.abs() < 4.0 { (std::f64::consts::PI * across / 8.0).cos().powi(2) } else { 0.0 };
                    *v = (*v - WEAVE_THREAD * thread * window).max(0.0);
                }
                Flaw::Stain => {
                    let rho2 = wrapped(r as f64, blob.0, h).powi(2) + wrapped(c as f64, blob.1, w).powi(2);
                    *v *= 1.0 - 0.45 * (-rho2 / (2.0 * blob_sigma * blob_sigma)).exp();
                }
                Flaw::Slub => {
                    // Wider and brighter than the thread over about 12 pixels.
                    let bump = (-(along * along) / (2.0 * 5.0 * 5.0)).exp() * (-(across * across) / (2.0 * 2.2 * 2.2)).exp();
                    *v = (*v + 0.22 * bump).min(1.0);
                }
            }
        }
    }
}

/// Suggested settings for [`woven_cloth`]: p4m, cell 16 x 16 on the pixel
/// grid, origin pixel (0, 0), 3 generators, a band of the 128 most
/// energetic frequencies (so that the flaws show in the residuals).
fn woven_settings() -> FitSettings {
    FitSettings {
        group: PlaneGroup::standard(GroupSymbol::P4m),
        cell_rows: WEAVE_PERIOD,
        cell_cols: WEAVE_PERIOD,
        origin: [0, 0],
        generators: 3,
        // The weave lives on the lattice peaks; a band of its 128 strongest
        // frequencies leaves the broadband flaws in the residual.
        band: Some(crate::settings::BandSpec::Frequencies(128)),
        lattice_coords: false,
    }
}

/// Woven cloth inspection stack: 8 images of 128 x 128 pixels of the
/// [`woven_pattern`] (period 16 px, p4m about pixel (0, 0)), Gaussian noise
/// of standard deviation 0.02 clamped to [0, 1], and flaws placed at random
/// (fixed seed): a broken thread in `cloth-2` and `cloth-6`, a stain in
/// `cloth-3`, `cloth-6` and `cloth-8`, a slub in `cloth-5` and `cloth-8`.
pub fn woven_cloth() -> DemoStack {
    let pattern = woven_pattern(WOVEN_SIZE, WOVEN_SIZE);
    let images = CLOTH_FLAWS
        .iter()
        .enumerate()
        .map(|(i, flaws)| {
            let mut rng = SplitMix64(0x0C10_7D00 + i as u64);
            let mut image = pattern.clone();
            for &flaw in *flaws {
                apply_flaw(&mut image, flaw, &mut rng);
            }
            add_noise(&mut image, WOVEN_NOISE, &mut rng);
            (format!("cloth-{}", i + 1), image)
        })
        .collect();
    DemoStack {
        name: "woven cloth",
        description: "Woven cloth inspection: 8 images of 128 x 128 pixels of a square weave repeating \
                      every 16 pixels (p4m about pixel 0,0), with noise and a few flaws: a broken \
                      thread in cloth-2 and cloth-6, a stain in cloth-3, cloth-6 and cloth-8, a thick \
                      spot (slub) in cloth-5 and cloth-8.",
        images,
        suggested: woven_settings(),
        lattice: None,
    }
}

// ------------------------------------------------------------------ honeycomb

/// Samples per lattice cell along each lattice axis.
const HONEYCOMB_CELL: usize = 12;
const HONEYCOMB_SIZE: usize = 96;
const HONEYCOMB_IMAGES: usize = 6;
const HONEYCOMB_NOISE: f64 = 0.03;
/// Atom positions in lattice coordinates (fractions of the cell).
const HONEYCOMB_ATOMS: [[f64; 2]; 2] = [[1.0 / 3.0, 1.0 / 3.0], [2.0 / 3.0, 2.0 / 3.0]];
/// Gaussian width of an atom in units of the lattice constant.
const ATOM_SIGMA: f64 = 0.13;
const HONEYCOMB_BACKGROUND: f64 = 0.08;
const HONEYCOMB_ATOM: f64 = 0.82;
/// The image (1-based label number) that has a vacancy.
const VACANCY_IMAGE: usize = 3;

/// Squared length of `du a + dv b` for unit lattice vectors `a`, `b` at 60°:
/// `du² + dv² + 2 du dv cos 60° = du² + dv² + du dv`.
fn hex_norm2(du: f64, dv: f64) -> f64 {
    du * du + dv * dv + du * dv
}

/// One atom: `exp(−d² / (2σ²))` with `d` the true (hexagonal) distance in
/// units of the lattice constant.
fn atom(du: f64, dv: f64) -> f64 {
    (-hex_norm2(du, dv) / (2.0 * ATOM_SIGMA * ATOM_SIGMA)).exp()
}

/// The noise-free honeycomb of `cells x cells` cells, `12 cells` samples a
/// side, sample `(i, j)` at lattice coordinates `(i/12, j/12)`.
///
/// `A(u) = Σ_atoms Σ_{k,l} atom(u − p − (k, l))` over the two atoms `p` at
/// `(1/3, 1/3)`, `(2/3, 2/3)` and their periodic images `|k|, |l| ≤ 2`;
/// `I = 0.08 + 0.82 A`. Because distances use the hexagonal metric, the
/// pattern has p6m symmetry about the origin: it is unchanged by the 60°
/// rotation `(i, j) ↦ (−j, i + j)` and the mirror `(i, j) ↦ (j, i)` (mod
/// the size), up to rounding.
fn honeycomb_pattern(cells: usize) -> Image {
    let n = HONEYCOMB_CELL;
    let mut cell = vec![0.0; n * n];
    for i in 0..n {
        for j in 0..n {
            let (u, v) = (i as f64 / n as f64, j as f64 / n as f64);
            let mut sum = 0.0;
            for p in HONEYCOMB_ATOMS {
                for k in -2..=2 {
                    for l in -2..=2 {
                        sum += atom(u - p[0] - f64::from(k), v - p[1] - f64::from(l));
                    }
                }
            }
            cell[i * n + j] = HONEYCOMB_BACKGROUND + HONEYCOMB_ATOM * sum;
        }
    }
    let side = cells * n;
    let pixels = (0..side * side).map(|x| cell[(x / side % n) * n + x % side % n]).collect();
    Image::new(side, side, pixels)
}

/// Removes the atom at lattice coordinates `centre` (in cells) from
/// `image`, taking the torus into account.
fn remove_atom(image: &mut Image, centre: [f64; 2]) {
    let cells = (image.height / HONEYCOMB_CELL) as f64;
    let n = HONEYCOMB_CELL as f64;
    for i in 0..image.height {
        for j in 0..image.width {
            let du = wrapped(i as f64 / n, centre[0], cells as usize);
            let dv = wrapped(j as f64 / n, centre[1], cells as usize);
            let mut sum = 0.0;
            for k in -1..=1 {
                for l in -1..=1 {
                    sum += atom(du - cells * f64::from(k), dv - cells * f64::from(l));
                }
            }
            image.pixels[i * image.width + j] -= HONEYCOMB_ATOM * sum;
        }
    }
}

/// Suggested settings for [`honeycomb_lattice_coords`]: p6m, cell 12 x 12
/// samples, origin (0, 0), 3 generators, lattice coordinates.
fn honeycomb_settings() -> FitSettings {
    FitSettings {
        group: PlaneGroup::standard(GroupSymbol::P6m),
        cell_rows: HONEYCOMB_CELL,
        cell_cols: HONEYCOMB_CELL,
        origin: [0, 0],
        generators: 3,
        band: None,
        lattice_coords: true,
    }
}

/// Honeycomb monolayer stack, already in lattice coordinates: 6 images of
/// 96 x 96 samples on a grid whose axes are the two lattice vectors at 60°
/// (12 x 12 samples per cell, 8 x 8 cells). Two atoms per cell at
/// `(1/3, 1/3)` and `(2/3, 2/3)` as Gaussian bumps in the true hexagonal
/// metric (p6m about the origin), Gaussian noise of standard deviation 0.03
/// clamped to [0, 1], and one vacancy (a missing atom) in `honeycomb-3`.
pub fn honeycomb_lattice_coords() -> DemoStack {
    let cells = HONEYCOMB_SIZE / HONEYCOMB_CELL;
    let pattern = honeycomb_pattern(cells);
    let images = (0..HONEYCOMB_IMAGES)
        .map(|i| {
            let mut rng = SplitMix64(0x4EC5_0000 + i as u64);
            let mut image = pattern.clone();
            if i + 1 == VACANCY_IMAGE {
                let which = HONEYCOMB_ATOMS[(rng.uniform() * 2.0) as usize];
                let cell = [(rng.uniform() * cells as f64).floor(), (rng.uniform() * cells as f64).floor()];
                remove_atom(&mut image, [cell[0] + which[0], cell[1] + which[1]]);
            }
            add_noise(&mut image, HONEYCOMB_NOISE, &mut rng);
            (format!("honeycomb-{}", i + 1), image)
        })
        .collect();
    DemoStack {
        name: "honeycomb monolayer",
        description: "Honeycomb monolayer micrographs already resampled to lattice coordinates: 6 images \
                      of 96 x 96 samples whose axes are the two lattice vectors at 60 degrees, 12 x 12 \
                      samples per cell (p6m about the origin), with noise and one missing atom in \
                      honeycomb-3.",
        images,
        suggested: honeycomb_settings(),
        lattice: None,
    }
}

/// Lattice constant (pixels), angle of `a1` from the row axis (degrees),
/// and the pixel position of a hexagon centre, for [`honeycomb_micrograph`].
const MICROGRAPH_SPACING: f64 = 9.6;
const MICROGRAPH_ANGLE: f64 = 17.0;
const MICROGRAPH_CENTRE: [f64; 2] = [37.3, 52.6];
const MICROGRAPH_SIZE: usize = 160;
const MICROGRAPH_NOISE: f64 = 0.04;

/// The micrograph's lattice vectors `a1`, `a2` (60° apart) in pixels.
pub fn micrograph_lattice() -> [[f64; 2]; 2] {
    let (t1, t2) = (MICROGRAPH_ANGLE.to_radians(), (MICROGRAPH_ANGLE + 60.0).to_radians());
    let a = MICROGRAPH_SPACING;
    [[a * t1.cos(), a * t1.sin()], [a * t2.cos(), a * t2.sin()]]
}

/// Noise-free honeycomb intensity at a pixel, optionally without the atom
/// at lattice position `vacancy`.
fn micrograph_value(r: f64, c: f64, vacancy: Option<[f64; 2]>) -> f64 {
    let [a1, a2] = micrograph_lattice();
    let det = a1[0] * a2[1] - a1[1] * a2[0];
    let (dr, dc) = (r - MICROGRAPH_CENTRE[0], c - MICROGRAPH_CENTRE[1]);
    let u = (dr * a2[1] - dc * a2[0]) / det;
    let v = (a1[0] * dc - a1[1] * dr) / det;
    let (fu, fv) = (u - u.floor(), v - v.floor());
    let mut sum = 0.0;
    for p in HONEYCOMB_ATOMS {
        for k in -2..=2 {
            for l in -2..=2 {
                sum += atom(fu - p[0] - f64::from(k), fv - p[1] - f64::from(l));
            }
        }
    }
    if let Some(q) = vacancy {
        sum -= atom(u - q[0], v - q[1]);
    }
    HONEYCOMB_BACKGROUND + HONEYCOMB_ATOM * sum
}

/// Honeycomb monolayer micrograph stack: 6 images of 160 x 160 pixels, a
/// hexagonal lattice of spacing 9.6 px with `a1` at 17° to the rows (not on
/// the pixel grid), two atoms per cell as in [`honeycomb_lattice_coords`]
/// (p6m about a hexagon centre at pixel (37.3, 52.6)), Gaussian noise of
/// standard deviation 0.04 clamped to [0, 1], and one vacancy near the
/// middle of `micrograph-3`. Suggested: detect the lattice, resample with
/// about 10 samples per cell, fit p6m with 1 generator in a band of the 61
/// most energetic frequencies (the lattice peaks), so that the vacancy stays
/// in the residual.
pub fn honeycomb_micrograph() -> DemoStack {
    let n = MICROGRAPH_SIZE;
    let [a1, a2] = micrograph_lattice();
    let det = a1[0] * a2[1] - a1[1] * a2[0];
    // the atom at (1/3, 1/3) of the cell containing the image centre
    let (dr, dc) = (n as f64 / 2.0 - MICROGRAPH_CENTRE[0], n as f64 / 2.0 - MICROGRAPH_CENTRE[1]);
    let (u, v) = ((dr * a2[1] - dc * a2[0]) / det, (a1[0] * dc - a1[1] * dr) / det);
    let vacancy = [u.floor() + 1.0 / 3.0, v.floor() + 1.0 / 3.0];
    let images = (1..=HONEYCOMB_IMAGES)
        .map(|k| {
            let mut rng = SplitMix64(0x6d69_6372_6f00_0000 + k as u64);
            let hole = (k == VACANCY_IMAGE).then_some(vacancy);
            let px = (0..n * n).map(|x| micrograph_value((x / n) as f64, (x % n) as f64, hole)).collect();
            let mut image = Image::new(n, n, px);
            add_noise(&mut image, MICROGRAPH_NOISE, &mut rng);
            (format!("micrograph-{k}"), image)
        })
        .collect();
    DemoStack {
        name: "honeycomb-micrograph",
        description: "Honeycomb monolayer micrographs: hexagonal lattice at 17° to the pixels, 9.6 px spacing, noise, one vacancy in micrograph-3",
        images,
        suggested: FitSettings {
            group: PlaneGroup::standard(GroupSymbol::P6m),
            cell_rows: 10,
            cell_cols: 10,
            origin: [0, 0],
            generators: 1,
            band: Some(crate::settings::BandSpec::Frequencies(61)),
            lattice_coords: true,
        },
        lattice: Some(micrograph_lattice()),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Largest `|f(g x) − f(x)|` over the torus for the map `g` on (row, column).
    fn worst_change(image: &Image, g: impl Fn(i64, i64) -> (i64, i64)) -> f64 {
        let (h, w) = (image.height as i64, image.width as i64);
        let mut worst: f64 = 0.0;
        for r in 0..h {
            for c in 0..w {
                let (gr, gc) = g(r, c);
                let moved = image.at(gr.rem_euclid(h) as usize, gc.rem_euclid(w) as usize);
                worst = worst.max((moved - image.at(r as usize, c as usize)).abs());
            }
        }
        worst
    }

    /// Root mean square and largest absolute difference of two images.
    fn difference(a: &Image, b: &Image) -> (f64, f64) {
        let d: Vec<f64> = a.pixels.iter().zip(&b.pixels).map(|(x, y)| x - y).collect();
        let rms = (d.iter().map(|v| v * v).sum::<f64>() / d.len() as f64).sqrt();
        (rms, d.iter().fold(0.0, |m: f64, v| m.max(v.abs())))
    }

    #[test]
    fn woven_pattern_has_p4m_symmetry_about_pixel_0_0() {
        let p = woven_pattern(128, 128);
        assert!(worst_change(&p, |r, c| (-c, r)) < 1e-12, "90° rotation");
        assert!(worst_change(&p, |r, c| (r, -c)) < 1e-12, "mirror");
        assert!(worst_change(&p, |r, c| (-r, c)) < 1e-12, "mirror");
        assert!(worst_change(&p, |r, c| (c, r)) < 1e-12, "diagonal mirror");
        assert!(worst_change(&p, |r, c| (r + 16, c)) < 1e-12, "period 16 down");
        assert!(worst_change(&p, |r, c| (r, c + 16)) < 1e-12, "period 16 across");
    }

    #[test]
    fn woven_cell_is_16_not_8() {
        let p = woven_pattern(128, 128);
        // Half a period moves the bright raised crossing (0.95) onto a sunken one (0.57).
        assert!((worst_change(&p, |r, c| (r + 8, c)) - 0.38).abs() < 1e-12);
        // The diagonal half period swaps the two kinds of raised crossing (0.95, 0.79).
        assert!((worst_change(&p, |r, c| (r + 8, c + 8)) - 0.16).abs() < 1e-12);
        // Rotation about another pixel is not a symmetry.
        assert!(worst_change(&p, |r, c| (4 - c, r)) > 0.1);
    }

    #[test]
    fn woven_pattern_values() {
        let p = woven_pattern(16, 16);
        assert!((p.at(0, 0) - 0.95).abs() < 1e-12, "raised crossing, first yarn");
        assert!((p.at(8, 8) - 0.79).abs() < 1e-12, "raised crossing, second yarn");
        assert!((p.at(0, 8) - 0.57).abs() < 1e-12, "sunken crossing");
        assert!((p.at(8, 0) - 0.57).abs() < 1e-12, "sunken crossing");
        assert!((p.at(4, 4) - 0.12).abs() < 1e-12, "hole between threads");
        assert!((p.at(0, 4) - 0.42).abs() < 1e-12, "thread between crossings");
        let (lo, hi) = p.pixels.iter().fold((1.0f64, 0.0f64), |(lo, hi), &v| (lo.min(v), hi.max(v)));
        assert!((lo - 0.12).abs() < 1e-12 && (hi - 0.95).abs() < 1e-12, "range {lo}..{hi}");
    }

    #[test]
    fn woven_cloth_sizes_labels_and_settings() {
        let demo = woven_cloth();
        assert_eq!(demo.images.len(), 8);
        for (k, (label, image)) in demo.images.iter().enumerate() {
            assert_eq!(label, &format!("cloth-{}", k + 1));
            assert_eq!((image.height, image.width, image.pixels.len()), (128, 128, 128 * 128));
        }
        let s = &demo.suggested;
        assert_eq!(s.group.name(), "p4m");
        assert_eq!((s.cell_rows, s.cell_cols, s.origin, s.generators), (16, 16, [0, 0], 3));
        assert_eq!((s.band, s.lattice_coords), (Some(crate::settings::BandSpec::Frequencies(128)), false));
    }

    #[test]
    fn suggested_woven_fit_puts_the_flawed_cloths_above_the_clean_ones() {
        // cloth-1, cloth-4 and cloth-7 have no flaw: with the suggested
        // settings each of them must fit better than every flawed one.
        let demo = woven_cloth();
        let stack = crate::stack::Stack::new(demo.images.clone()).unwrap();
        let fit = crate::fit::fit(&stack, &demo.suggested, &mut crate::progress::Silent).unwrap();
        let rel = |name: &str| fit.report.images.iter().find(|e| e.file == name).unwrap().relative_error;
        let clean = ["cloth-1", "cloth-4", "cloth-7"].map(rel);
        let flawed = ["cloth-2", "cloth-3", "cloth-5", "cloth-6", "cloth-8"].map(rel);
        let worst_clean = clean.iter().cloned().fold(0.0, f64::max);
        let best_flawed = flawed.iter().cloned().fold(f64::INFINITY, f64::min);
        assert!(best_flawed > 1.05 * worst_clean, "clean {clean:?} flawed {flawed:?}");
    }

    #[test]
    fn demos_are_deterministic_and_in_range() {
        for (first, second) in all().into_iter().zip(all()) {
            assert_eq!(first.images, second.images, "{}", first.name);
            for (label, image) in &first.images {
                assert!(image.pixels.iter().all(|v| (0.0..=1.0).contains(v)), "{label}");
            }
        }
    }

    #[test]
    fn cloth_noise_and_flaws_are_where_described() {
        let clean = woven_pattern(128, 128);
        let demo = woven_cloth();
        for (k, (label, image)) in demo.images.iter().enumerate() {
            let (rms, max) = difference(image, &clean);
            if CLOTH_FLAWS[k].is_empty() {
                // Noise only: std 0.02, so the RMS is 0.02 to within a few
                // percent over 16384 pixels and no pixel is 6 sigma out.
                assert!((rms - 0.02).abs() < 0.001, "{label}: rms {rms}");
                assert!(max < 0.12, "{label}: max {max}");
            } else {
                assert!(max > 0.2, "{label}: a flaw should stand out, max {max}");
            }
        }
        // Flaws differ from image to image.
        let (_, between) = difference(&demo.images[1].1, &demo.images[5].1);
        assert!(between > 0.2);
    }

    #[test]
    fn honeycomb_pattern_has_p6m_symmetry_in_lattice_coordinates() {
        let p = honeycomb_pattern(8);
        assert!(worst_change(&p, |i, j| (-j, i + j)) < 1e-12, "60° rotation");
        assert!(worst_change(&p, |i, j| (j, i)) < 1e-12, "mirror");
        assert!(worst_change(&p, |i, j| (-i, -j)) < 1e-12, "2-fold rotation");
        assert!(worst_change(&p, |i, j| (i + 12, j)) < 1e-12, "cell 12");
        // A 90° turn of the grid is no symmetry of a hexagonal metric.
        assert!(worst_change(&p, |i, j| (-j, i)) > 0.3);
        // Atoms sit at (4, 4) and (8, 8) samples; the origin is a hexagon
        // centre. Neighbouring atoms, 1/sqrt(3) cell away, add 0.82 * 3 (or 6)
        // * exp(-(1/3) / (2 * 0.13^2)) = 1.3e-4 (2.6e-4).
        assert!((p.at(4, 4) - (0.08 + 0.82)).abs() < 1e-3);
        assert!((p.at(8, 8) - (0.08 + 0.82)).abs() < 1e-3);
        assert!((p.at(0, 0) - 0.08).abs() < 1e-3);
        for (i, j) in [(3, 4), (5, 4), (4, 3), (4, 5), (3, 5), (5, 3)] {
            assert!(p.at(i, j) < p.at(4, 4) - 0.1, "atom peak at (4, 4) vs ({i}, {j})");
        }
    }

    #[test]
    fn honeycomb_stack_sizes_vacancy_and_settings() {
        let demo = honeycomb_lattice_coords();
        assert_eq!(demo.images.len(), 6);
        let clean = honeycomb_pattern(8);
        for (k, (label, image)) in demo.images.iter().enumerate() {
            assert_eq!(label, &format!("honeycomb-{}", k + 1));
            assert_eq!((image.height, image.width), (96, 96));
            let (rms, max) = difference(image, &clean);
            if k + 1 == VACANCY_IMAGE {
                // The missing atom: about 0.82 lower at its peak.
                assert!(max > 0.6, "{label}: max {max}");
            } else {
                assert!((rms - 0.03).abs() < 0.002, "{label}: rms {rms}");
                assert!(max < 0.18, "{label}: max {max}");
            }
        }
        let s = &demo.suggested;
        assert_eq!(s.group.name(), "p6m");
        assert_eq!((s.cell_rows, s.cell_cols, s.origin, s.generators), (12, 12, [0, 0], 3));
        assert_eq!((s.band, s.lattice_coords), (None, true));
    }

    #[test]
    fn splitmix64_matches_its_reference_sequence() {
        // First outputs for seed 0 of the reference C implementation by
        // Sebastiano Vigna (splitmix64.c), from memory.
        let mut rng = SplitMix64(0);
        assert_eq!(rng.next_u64(), 0xE220_A839_7B1D_CDAF);
        assert_eq!(rng.next_u64(), 0x6E78_9E6A_A1B9_65F4);
    }

    #[test]
    fn normal_noise_has_unit_variance() {
        let mut rng = SplitMix64(7);
        let n = 200_000;
        let xs: Vec<f64> = (0..n).map(|_| rng.normal()).collect();
        let mean = xs.iter().sum::<f64>() / n as f64;
        let var = xs.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / n as f64;
        // Standard errors: 1/sqrt(n) = 0.0022 for the mean, sqrt(2/n) = 0.0032 for the variance.
        assert!(mean.abs() < 0.01, "{mean}");
        assert!((var - 1.0).abs() < 0.015, "{var}");
    }
}
