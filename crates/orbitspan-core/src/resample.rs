//! Resampling images onto a grid whose axes are two lattice vectors
//! (MATH.md §7), and back.
//!
//! Sample `(i, j)` of the lattice grid sits at the pixel position
//! `p(i, j) = origin + (i / s1) A1 + (j / s2) A2` (pixel coordinates
//! `(row, column)`, pixel centres at integers), for `i < c1 s1`, `j < c2 s2`:
//! `c1 x c2` whole cells of `s1 x s2` samples. The grid is therefore periodic
//! with the lattice, and every plane group acts on it by integer maps.
//! Interpolation is bicubic convolution (Keys 1981, `a = −1/2`), which
//! reproduces quadratics exactly. Grid samples have equal area, so least
//! squares on the grid is least squares in the plane (up to the constant
//! area factor). [`LatticeGrid::round_trip_error`] measures what
//! interpolation loses on the data: resample forward and back.

use crate::error::{Error, Result};
use crate::stack::Image;

/// Two cell vectors in pixel units, `(row, column)` components.
pub type CellVectors = [[f64; 2]; 2];

/// A lattice-aligned sampling grid inside an image.
#[derive(Clone, Debug, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct LatticeGrid {
    /// Pixel position of sample `(0, 0)`.
    pub origin: [f64; 2],
    /// Cell vectors `A1`, `A2` in pixels.
    pub cell: CellVectors,
    /// Samples per cell along `A1`, `A2`.
    pub samples: [usize; 2],
    /// Whole cells along `A1`, `A2`.
    pub cells: [usize; 2],
}

/// Keys' cubic convolution kernel with `a = −1/2`.
fn keys(x: f64) -> f64 {
    let x = x.abs();
    if x < 1.0 {
        (1.5 * x - 2.5) * x * x + 1.0
    } else if x < 2.0 {
        ((-0.5 * x + 2.5) * x - 4.0) * x + 2.0
    } else {
        0.0
    }
}

/// Bicubic value of `img` at the real position `(r, c)`; indices are
/// wrapped periodically when `periodic`, clamped to the edge otherwise.
pub fn bicubic(img: &Image, r: f64, c: f64, periodic: bool) -> f64 {
    let (h, w) = (img.height as i64, img.width as i64);
    let (r0, c0) = (r.floor() as i64, c.floor() as i64);
    let (fr, fc) = (r - r0 as f64, c - c0 as f64);
    let wr = [keys(fr + 1.0), keys(fr), keys(1.0 - fr), keys(2.0 - fr)];
    let wc = [keys(fc + 1.0), keys(fc), keys(1.0 - fc), keys(2.0 - fc)];
    let index = |v: i64, n: i64| if periodic { v.rem_euclid(n) } else { v.clamp(0, n - 1) };
    let mut acc = 0.0;
    for (i, wri) in wr.iter().enumerate() {
        let rr = index(r0 - 1 + i as i64, h) as usize;
        let mut row = 0.0;
        for (j, wcj) in wc.iter().enumerate() {
            let cc = index(c0 - 1 + j as i64, w) as usize;
            row += wcj * img.pixels[rr * img.width + cc];
        }
        acc += wri * row;
    }
    acc
}

fn norm(v: [f64; 2]) -> f64 {
    (v[0] * v[0] + v[1] * v[1]).sqrt()
}

impl LatticeGrid {
    /// The largest grid of whole cells that fits inside a `height x width`
    /// image with a 2-pixel margin (bicubic needs neighbours). `samples`
    /// defaults to about one sample per pixel along each cell vector;
    /// `equal` forces `s1 = s2` and `c1 = c2` (square and hexagonal groups
    /// need a square torus); `even` forces even sample counts (glides, centring).
    pub fn fit_inside(height: usize, width: usize, cell: CellVectors, samples: Option<[usize; 2]>, equal: bool, even: bool) -> Result<LatticeGrid> {
        let det = cell[0][0] * cell[1][1] - cell[0][1] * cell[1][0];
        if !(det.abs() > 1e-6) || cell.iter().flatten().any(|v| !v.is_finite()) {
            return Err(Error::input("the two lattice vectors are parallel or not finite numbers"));
        }
        if norm(cell[0]) < 2.0 || norm(cell[1]) < 2.0 {
            return Err(Error::input("lattice vectors shorter than 2 pixels cannot be resampled meaningfully"));
        }
        let mut s = samples.unwrap_or([norm(cell[0]).round().max(2.0) as usize, norm(cell[1]).round().max(2.0) as usize]);
        if equal {
            let m = s[0].max(s[1]);
            s = [m, m];
        }
        if even {
            s = [s[0] + s[0] % 2, s[1] + s[1] % 2];
        }
        if s[0] == 0 || s[1] == 0 {
            return Err(Error::input("samples per cell must be at least 1"));
        }
        let margin = 2.0;
        let (hmax, wmax) = (height as f64 - 1.0 - 2.0 * margin, width as f64 - 1.0 - 2.0 * margin);
        let extent = |c1: usize, c2: usize| {
            let (a, b) = ([cell[0][0] * c1 as f64, cell[0][1] * c1 as f64], [cell[1][0] * c2 as f64, cell[1][1] * c2 as f64]);
            let rows = [0.0, a[0], b[0], a[0] + b[0]];
            let cols = [0.0, a[1], b[1], a[1] + b[1]];
            let (rmin, rmax) = rows.iter().fold((f64::MAX, f64::MIN), |(lo, hi), &v| (lo.min(v), hi.max(v)));
            let (cmin, cmax) = cols.iter().fold((f64::MAX, f64::MIN), |(lo, hi), &v| (lo.min(v), hi.max(v)));
            (rmax - rmin, cmax - cmin, rmin, cmin)
        };
        let fits = |c1: usize, c2: usize| {
            let (dr, dc, _, _) = extent(c1, c2);
            dr <= hmax && dc <= wmax
        };
        let mut best: Option<[usize; 2]> = None;
        let limit = (height + width) / 2 + 2;
        if equal {
            for c in 1..limit {
                if fits(c, c) {
                    best = Some([c, c]);
                } else {
                    break;
                }
            }
        } else {
            let mut area = 0;
            for c1 in 1..limit {
                if !fits(c1, 1) {
                    break;
                }
                let mut c2 = 1;
                while fits(c1, c2 + 1) {
                    c2 += 1;
                }
                if c1 * c2 > area {
                    area = c1 * c2;
                    best = Some([c1, c2]);
                }
            }
        }
        let cells = best.ok_or_else(|| {
            Error::input(format!(
                "not even one lattice cell ({:.1} x {:.1} px) fits inside the {height}x{width} image",
                norm(cell[0]),
                norm(cell[1])
            ))
        })?;
        let (dr, dc, rmin, cmin) = extent(cells[0], cells[1]);
        // centre the parallelogram in the image
        let origin = [(height as f64 - 1.0 - dr) / 2.0 - rmin, (width as f64 - 1.0 - dc) / 2.0 - cmin];
        Ok(LatticeGrid { origin, cell, samples: s, cells })
    }

    /// Size of the resampled torus `[c1 s1, c2 s2]`.
    pub fn size(&self) -> [usize; 2] {
        [self.cells[0] * self.samples[0], self.cells[1] * self.samples[1]]
    }

    /// Pixel position of the (real) grid coordinate `(i, j)`.
    pub fn pixel_of(&self, i: f64, j: f64) -> [f64; 2] {
        let (u, v) = (i / self.samples[0] as f64, j / self.samples[1] as f64);
        [
            self.origin[0] + u * self.cell[0][0] + v * self.cell[1][0],
            self.origin[1] + u * self.cell[0][1] + v * self.cell[1][1],
        ]
    }

    /// Grid coordinate `(i, j)` of a pixel position (inverse of [`Self::pixel_of`]).
    pub fn grid_of(&self, p: [f64; 2]) -> [f64; 2] {
        let (a, b) = (self.cell[0], self.cell[1]);
        let det = a[0] * b[1] - a[1] * b[0];
        let (dr, dc) = (p[0] - self.origin[0], p[1] - self.origin[1]);
        let u = (dr * b[1] - dc * b[0]) / det;
        let v = (a[0] * dc - a[1] * dr) / det;
        [u * self.samples[0] as f64, v * self.samples[1] as f64]
    }

    /// A copy with the grid origin moved by `delta` samples along the axes.
    pub fn shifted(&self, delta: [f64; 2]) -> LatticeGrid {
        let mut g = self.clone();
        g.origin = self.pixel_of(delta[0], delta[1]);
        g
    }

    /// The image resampled onto the grid (bicubic, edge-clamped).
    pub fn to_lattice(&self, img: &Image) -> Image {
        let [n1, n2] = self.size();
        let mut px = Vec::with_capacity(n1 * n2);
        for i in 0..n1 {
            for j in 0..n2 {
                let p = self.pixel_of(i as f64, j as f64);
                px.push(bicubic(img, p[0], p[1], false));
            }
        }
        Image::new(n1, n2, px)
    }

    /// A grid image mapped back to a `height x width` pixel image (bicubic
    /// on the periodic grid, so the lattice pattern continues outside the
    /// covered parallelogram), with the mask of pixels inside it.
    pub fn to_pixels(&self, grid_img: &Image, height: usize, width: usize) -> (Image, Vec<bool>) {
        let [n1, n2] = self.size();
        let mut px = Vec::with_capacity(height * width);
        let mut mask = Vec::with_capacity(height * width);
        for r in 0..height {
            for c in 0..width {
                let g = self.grid_of([r as f64, c as f64]);
                mask.push(g[0] >= 0.0 && g[1] >= 0.0 && g[0] <= (n1 - 1) as f64 && g[1] <= (n2 - 1) as f64);
                px.push(bicubic(grid_img, g[0], g[1], true));
            }
        }
        (Image::new(height, width, px), mask)
    }

    /// Relative interpolation error of a forward-and-back resampling,
    /// `sqrt(Σ_mask (f − f')² / Σ_mask (f − mean)²)`, over all images, on the
    /// covered pixels at least 2 pixels inside the parallelogram's edge.
    pub fn round_trip_error(&self, images: &[Image]) -> f64 {
        let (mut num, mut den) = (0.0, 0.0);
        let [n1, n2] = self.size();
        for img in images {
            let back = self.to_pixels(&self.to_lattice(img), img.height, img.width).0;
            let inner: Vec<usize> = (0..img.pixels.len())
                .filter(|&k| {
                    let g = self.grid_of([(k / img.width) as f64, (k % img.width) as f64]);
                    g[0] >= 2.0 && g[1] >= 2.0 && g[0] <= n1 as f64 - 3.0 && g[1] <= n2 as f64 - 3.0
                })
                .collect();
            if inner.is_empty() {
                continue;
            }
            let mean = inner.iter().map(|&k| img.pixels[k]).sum::<f64>() / inner.len() as f64;
            for &k in &inner {
                num += (img.pixels[k] - back.pixels[k]).powi(2);
                den += (img.pixels[k] - mean).powi(2);
            }
        }
        if den > 0.0 {
            (num / den).sqrt()
        } else {
            0.0
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A smooth, band-limited pattern periodic on a lattice with the given
    /// reciprocal vectors (cycles per pixel).
    fn pattern(h: usize, w: usize, b: [[f64; 2]; 2]) -> Image {
        let tau = std::f64::consts::TAU;
        Image::new(
            h,
            w,
            (0..h * w)
                .map(|k| {
                    let (r, c) = ((k / w) as f64, (k % w) as f64);
                    let p1 = tau * (b[0][0] * r + b[0][1] * c);
                    let p2 = tau * (b[1][0] * r + b[1][1] * c);
                    0.5 + 0.2 * p1.cos() + 0.15 * (p2 + 0.3).cos() + 0.1 * (p1 + p2).cos()
                })
                .collect(),
        )
    }

    #[test]
    fn keys_kernel_reproduces_quadratics() {
        // Keys (1981): the a = -1/2 kernel interpolates polynomials up to degree 2 exactly.
        let img = Image::new(8, 8, (0..64).map(|k| { let (r, c) = ((k / 8) as f64, (k % 8) as f64); 0.3 * r * r - 0.2 * r * c + c + 1.0 }).collect());
        for (r, c) in [(3.25, 2.5), (4.9, 3.1), (2.0, 4.0)] {
            let exact = 0.3 * r * r - 0.2 * r * c + c + 1.0;
            assert!((bicubic(&img, r, c, false) - exact).abs() < 1e-12);
        }
    }

    #[test]
    fn grid_maps_invert_and_round_trip_is_accurate() {
        // A hexagonal lattice of spacing 11.3 px at 17°; pattern with the
        // matching reciprocal vectors (a_i · b_j = δ_ij).
        let (len, ang) = (11.3f64, 17f64.to_radians());
        let a1 = [len * ang.cos(), len * ang.sin()];
        let a2 = [len * (ang + std::f64::consts::FRAC_PI_3).cos(), len * (ang + std::f64::consts::FRAC_PI_3).sin()];
        let det = a1[0] * a2[1] - a1[1] * a2[0];
        let b = [[a2[1] / det, -a2[0] / det], [-a1[1] / det, a1[0] / det]];
        let img = pattern(96, 128, b);
        let grid = LatticeGrid::fit_inside(96, 128, [a1, a2], None, true, false).unwrap();
        assert_eq!(grid.samples, [11, 11]);
        assert!(grid.cells[0] >= 5);
        let p = grid.pixel_of(3.5, 7.25);
        let g = grid.grid_of(p);
        assert!((g[0] - 3.5).abs() < 1e-12 && (g[1] - 7.25).abs() < 1e-12);
        // the resampled image is periodic with the cell: sample (i, j) equals (i + s, j)
        let lat = grid.to_lattice(&img);
        let s = grid.samples[0];
        let mut worst = 0.0f64;
        for i in 0..lat.height - s {
            for j in 0..lat.width {
                worst = worst.max((lat.at(i, j) - lat.at(i + s, j)).abs());
            }
        }
        assert!(worst < 0.02, "not periodic with the cell: {worst}");
        // forward and back: stated tolerance 2 % relative for this smooth pattern
        let e = grid.round_trip_error(&[img]);
        assert!(e < 0.02, "round trip error {e}");
    }

    #[test]
    fn too_small_images_are_refused() {
        let msg = LatticeGrid::fit_inside(10, 10, [[12.0, 0.0], [0.0, 12.0]], None, false, false).unwrap_err().to_string();
        assert!(msg.contains("not even one lattice cell"), "{msg}");
        let msg = LatticeGrid::fit_inside(100, 100, [[12.0, 0.0], [24.0, 0.0]], None, false, false).unwrap_err().to_string();
        assert!(msg.contains("parallel"), "{msg}");
    }
}
