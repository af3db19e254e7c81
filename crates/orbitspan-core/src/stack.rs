//! Images and stacks of images on one pixel grid (the torus `Z_n1 x Z_n2`).
//!
//! Pixel `(row, column)` = `(x1, x2)`, origin top-left, row-major storage
//! (MATH.md §6b). Intensities are `f64`; integer files are scaled to [0, 1].

use crate::error::{Error, Result};

/// One grey-level image, row-major, `height` rows of `width` pixels.
#[derive(Clone, Debug, PartialEq)]
pub struct Image {
    pub height: usize,
    pub width: usize,
    pub pixels: Vec<f64>,
}

impl Image {
    /// An image from row-major pixels; panics if the length is not `height * width`.
    pub fn new(height: usize, width: usize, pixels: Vec<f64>) -> Self {
        assert_eq!(pixels.len(), height * width, "pixel count must be height * width");
        Image { height, width, pixels }
    }
    /// An all-zero image.
    pub fn zeros(height: usize, width: usize) -> Self {
        Image { height, width, pixels: vec![0.0; height * width] }
    }
    /// Pixel at row `r`, column `c`.
    pub fn at(&self, r: usize, c: usize) -> f64 {
        self.pixels[r * self.width + c]
    }
    /// Squared norm `Σ_x f(x)²`.
    pub fn energy(&self) -> f64 {
        self.pixels.iter().map(|v| v * v).sum()
    }
    /// Cyclic shift: `out(x) = self(x - shift)` (indices mod the size).
    pub fn shifted(&self, shift_rows: usize, shift_cols: usize) -> Image {
        let (h, w) = (self.height, self.width);
        let mut out = vec![0.0; h * w];
        let sc = shift_cols % w;
        for r in 0..h {
            // Row r moves to row r + shift_rows; within it, columns
            // 0..w−sc move right by sc and the last sc wrap to the front.
            let src = &self.pixels[r * w..(r + 1) * w];
            let row = (r + shift_rows) % h;
            let dst = &mut out[row * w..(row + 1) * w];
            dst[sc..].copy_from_slice(&src[..w - sc]);
            dst[..sc].copy_from_slice(&src[w - sc..]);
        }
        Image::new(h, w, out)
    }
}

/// A stack of equally sized images, each with a label (usually `file` or
/// `file#page` or `file@row,col` for tiles) used in messages and reports.
#[derive(Clone, Debug)]
pub struct Stack {
    height: usize,
    width: usize,
    images: Vec<Image>,
    labels: Vec<String>,
}

impl Stack {
    /// Builds a stack, checking that it is non-empty, that all images share one
    /// size and that every pixel is finite. Errors name the offending label.
    pub fn new(items: Vec<(String, Image)>) -> Result<Stack> {
        Self::check(&items)?;
        let (height, width) = (items[0].1.height, items[0].1.width);
        let (labels, images) = items.into_iter().unzip();
        Ok(Stack { height, width, images, labels })
    }

    /// The checks of [`Stack::new`] without building the stack (the items
    /// stay with the caller).
    pub fn check(items: &[(String, Image)]) -> Result<()> {
        let Some((first_label, first)) = items.first() else {
            return Err(Error::input("the stack is empty: add at least one image"));
        };
        let (height, width) = (first.height, first.width);
        let first_label = first_label.clone();
        if height == 0 || width == 0 {
            return Err(Error::file(first_label.clone(), "image has no pixels"));
        }
        for (label, image) in items {
            if image.height != height || image.width != width {
                return Err(Error::file(
                    label.clone(),
                    format!(
                        "size {}x{} (height x width) does not match the stack's {}x{} (set by {})",
                        image.height, image.width, height, width, first_label
                    ),
                ));
            }
            if let Some(i) = image.pixels.iter().position(|v| !v.is_finite()) {
                return Err(Error::file(
                    label.clone(),
                    format!(
                        "pixel at row {}, column {} is {} (not a finite number)",
                        i / width,
                        i % width,
                        image.pixels[i]
                    ),
                ));
            }
        }
        Ok(())
    }

    /// The labelled images back (the inverse of [`Stack::new`], no copy).
    pub fn into_items(self) -> Vec<(String, Image)> {
        self.labels.into_iter().zip(self.images).collect()
    }
    pub fn height(&self) -> usize {
        self.height
    }
    pub fn width(&self) -> usize {
        self.width
    }
    pub fn len(&self) -> usize {
        self.images.len()
    }
    pub fn is_empty(&self) -> bool {
        self.images.is_empty()
    }
    pub fn images(&self) -> &[Image] {
        &self.images
    }
    pub fn labels(&self) -> &[String] {
        &self.labels
    }
    /// Total energy `Σ_i ||f_i||²`.
    pub fn energy(&self) -> f64 {
        self.images.iter().map(Image::energy).sum()
    }
}

/// Cuts `image` into non-overlapping tiles of `tile_h x tile_w`, row by row,
/// dropping partial tiles at the right and bottom edges. Labels are
/// `label@row,col` with the tile's top-left pixel.
pub fn cut_tiles(label: &str, image: &Image, tile_h: usize, tile_w: usize) -> Result<Vec<(String, Image)>> {
    if tile_h == 0 || tile_w == 0 {
        return Err(Error::input("tile size must be at least 1x1"));
    }
    if tile_h > image.height || tile_w > image.width {
        return Err(Error::file(
            label,
            format!(
                "image {}x{} is smaller than one tile {}x{}",
                image.height, image.width, tile_h, tile_w
            ),
        ));
    }
    let mut out = Vec::new();
    for r0 in (0..=image.height - tile_h).step_by(tile_h) {
        for c0 in (0..=image.width - tile_w).step_by(tile_w) {
            let mut px = Vec::with_capacity(tile_h * tile_w);
            for r in r0..r0 + tile_h {
                px.extend_from_slice(&image.pixels[r * image.width + c0..r * image.width + c0 + tile_w]);
            }
            out.push((format!("{label}@{r0},{c0}"), Image::new(tile_h, tile_w, px)));
        }
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn tiles_drop_partial_edges() {
        let img = Image::new(5, 7, (0..35).map(|v| v as f64).collect());
        let tiles = cut_tiles("big.png", &img, 2, 3).unwrap();
        // floor(5/2) * floor(7/3) = 2 * 2 tiles
        assert_eq!(tiles.len(), 4);
        assert_eq!(tiles[1].0, "big.png@0,3");
        assert_eq!(tiles[1].1.pixels, vec![3.0, 4.0, 5.0, 10.0, 11.0, 12.0]);
        assert_eq!(tiles[3].0, "big.png@2,3");
    }

    #[test]
    fn mismatched_sizes_name_the_file() {
        let err = Stack::new(vec![
            ("a.png".into(), Image::zeros(4, 4)),
            ("b.png".into(), Image::zeros(4, 5)),
        ])
        .unwrap_err();
        let msg = err.to_string();
        assert!(msg.starts_with("b.png:"), "{msg}");
        assert!(msg.contains("4x5") && msg.contains("4x4"), "{msg}");
    }

    #[test]
    fn nan_is_refused_with_position() {
        let mut img = Image::zeros(3, 3);
        img.pixels[5] = f64::NAN;
        let msg = Stack::new(vec![("f.tif".into(), img)]).unwrap_err().to_string();
        assert!(msg.contains("f.tif") && msg.contains("row 1, column 2") && msg.contains("NaN"), "{msg}");
    }

    #[test]
    fn shift_moves_pixels_cyclically() {
        let img = Image::new(2, 3, vec![1., 2., 3., 4., 5., 6.]);
        let s = img.shifted(1, 1);
        assert_eq!(s.pixels, vec![6., 4., 5., 3., 1., 2.]);
        // Every shift, including none and more than the size, against the
        // definition out(x) = in(x − shift) pixel by pixel.
        let img = Image::new(4, 5, (0..20).map(f64::from).collect());
        for (sr, sc) in [(0, 0), (0, 3), (2, 0), (3, 4), (5, 7), (8, 10)] {
            let s = img.shifted(sr, sc);
            for r in 0..4 {
                for c in 0..5 {
                    assert_eq!(s.at((r + sr) % 4, (c + sc) % 5), img.at(r, c), "shift {sr},{sc}");
                }
            }
        }
    }
}
