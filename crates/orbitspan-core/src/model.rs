//! A saved model: settings plus real Parseval generators, and applying it.
//!
//! Because the Γ-orbit `{π(γ) φ_l}` of the generators is a Parseval frame of
//! `V` (MATH.md §5b), the orthogonal projection is the frame operator
//! `P_V f = Σ_γ Σ_l ⟨f, π(γ)φ_l⟩ π(γ)φ_l`, computed fiber by fiber.
//!
//! ## File format (version 1), all integers little-endian
//! | bytes | content |
//! |---|---|
//! | 8 | magic `OSPMODEL` |
//! | 4 | format version, `u32` = 1 |
//! | 4 | header length `H`, `u32` |
//! | H | UTF-8 JSON header: `settings` (as in `report.json`), `height`, `width`, `generators` (count `L`), `checksum` (FNV-1a 64 of the data bytes, 16 hex digits), `written_by` |
//! | 8·L·height·width | the generators as `f64`, generator-major then row-major |

use crate::error::{Error, Result};
use crate::fiber::{HalfFibers, Symmetry};
use crate::fit::{check, from_group_frame, group_frame_spectra_into, group_frame_spectrum, ratio, validate};
use crate::frame::frame_project;
use crate::progress::Progress;
use crate::report::ImageError;
use crate::settings::FitSettings;
use crate::spectrum::ifft2_real;
use crate::stack::{Image, Stack};
use num_complex::Complex64;
use serde::{Deserialize, Serialize};

/// File name extension for saved models.
pub const MODEL_FILE_EXTENSION: &str = "orbitspan-model";
const MAGIC: &[u8; 8] = b"OSPMODEL";
const VERSION: u32 = 1;
/// Images per batch when evaluating a stack (bounds memory).
const BATCH: usize = 16;

/// A fitted model: settings, image size and the real generators (in pixel
/// coordinates, origin already applied).
#[derive(Clone, Debug)]
pub struct Model {
    settings: FitSettings,
    height: usize,
    width: usize,
    generators: Vec<Image>,
    symmetry: Symmetry,
    /// The generators' spectra in the group frame, the half that
    /// [`HalfFibers`] keeps (what the projection reads), made on first use
    /// (a fit that only reports does not hold them).
    spectra: std::sync::OnceLock<(HalfFibers, Vec<Vec<Complex64>>)>,
}

#[derive(Serialize, Deserialize)]
struct Header {
    settings: FitSettings,
    height: usize,
    width: usize,
    generators: usize,
    checksum: String,
    written_by: String,
}

fn fnv1a64(bytes: &[u8]) -> u64 {
    let mut hash = Fnv1a64::new();
    hash.write(bytes);
    hash.finish()
}

/// FNV-1a (64-bit) fed in pieces: the same value as over the pieces joined.
struct Fnv1a64(u64);

impl Fnv1a64 {
    fn new() -> Fnv1a64 {
        Fnv1a64(0xcbf2_9ce4_8422_2325)
    }
    fn write(&mut self, bytes: &[u8]) {
        for &b in bytes {
            self.0 ^= b as u64;
            self.0 = self.0.wrapping_mul(0x0100_0000_01b3);
        }
    }
    fn finish(&self) -> u64 {
        self.0
    }
}

impl Model {
    /// A model from settings and generator images of the given size.
    pub fn new(settings: FitSettings, height: usize, width: usize, generators: Vec<Image>) -> Result<Model> {
        let symmetry = validate(height, width, &settings)?;
        if generators.len() != settings.generators {
            return Err(Error::input(format!(
                "model has {} generator images but its settings say {}",
                generators.len(),
                settings.generators
            )));
        }
        for (i, g) in generators.iter().enumerate() {
            if g.height != height || g.width != width {
                return Err(Error::input(format!("generator {} is {}x{}, not {height}x{width}", i + 1, g.height, g.width)));
            }
            if g.pixels.iter().any(|v| !v.is_finite()) {
                return Err(Error::input(format!("generator {} has a value that is not a finite number", i + 1)));
            }
        }
        Ok(Model { settings, height, width, generators, symmetry, spectra: std::sync::OnceLock::new() })
    }

    pub fn settings(&self) -> &FitSettings {
        &self.settings
    }
    pub fn height(&self) -> usize {
        self.height
    }
    pub fn width(&self) -> usize {
        self.width
    }
    /// The real Parseval generators `φ_1..φ_L` (an all-zero one adds nothing).
    pub fn generators(&self) -> &[Image] {
        &self.generators
    }

    /// Drops the generators' spectra made for projections (made again when
    /// next needed): about the generators' size, which a caller keeping
    /// this model while it fits a new one need not hold meanwhile.
    pub fn forget_spectra(&mut self) {
        self.spectra = std::sync::OnceLock::new();
    }

    fn check_size(&self, label: &str, img: &Image) -> Result<()> {
        if img.height != self.height || img.width != self.width {
            return Err(Error::file(
                label,
                format!(
                    "size {}x{} does not match the model's {}x{}",
                    img.height, img.width, self.height, self.width
                ),
            ));
        }
        Ok(())
    }

    /// Fitted images `P_V f` of a batch (same order).
    fn project_batch(&self, images: &[&Image]) -> Vec<Image> {
        let origin = self.settings.origin;
        let mut spectra: Vec<Vec<Complex64>> = images.iter().map(|img| group_frame_spectrum(img, origin)).collect();
        let (half, generator_fibers) = self.spectra.get_or_init(|| {
            let l = self.symmetry.lattice();
            let half = HalfFibers::new(l);
            let kept = group_frame_spectra_into(&self.generators, origin, |s| half.keep(l, &s));
            (half, kept)
        });
        frame_project(&self.symmetry, half, generator_fibers, &mut spectra);
        spectra
            .iter()
            .map(|s| from_group_frame(&ifft2_real(s, self.height, self.width).0, origin))
            .collect()
    }

    /// The fitted image `P_V f`, the orthogonal projection onto the model's
    /// space; the residual is `f − P_V f`.
    pub fn project(&self, image: &Image) -> Result<Image> {
        self.check_size("image", image)?;
        Ok(self.project_batch(&[image]).remove(0))
    }

    /// Per-image energies and errors `||f_i − P_V f_i||²` of a stack.
    pub fn evaluate(&self, stack: &Stack, progress: &mut dyn Progress) -> Result<Vec<ImageError>> {
        for (label, img) in stack.labels().iter().zip(stack.images()) {
            self.check_size(label, img)?;
        }
        let mut out = Vec::with_capacity(stack.len());
        let items: Vec<(&String, &Image)> = stack.labels().iter().zip(stack.images()).collect();
        for (b, chunk) in items.chunks(BATCH).enumerate() {
            check(progress, "computing residuals", (b * BATCH) as f64 / stack.len() as f64)?;
            let imgs: Vec<&Image> = chunk.iter().map(|(_, i)| *i).collect();
            for ((label, img), fitted) in chunk.iter().zip(self.project_batch(&imgs)) {
                let energy = img.energy();
                let error: f64 = img.pixels.iter().zip(&fitted.pixels).map(|(a, b)| (a - b) * (a - b)).sum();
                out.push(ImageError { file: (*label).clone(), energy, error, relative_error: ratio(error, energy) });
            }
        }
        Ok(out)
    }

    /// Serialises the model (format in the module documentation).
    ///
    /// The checksum is taken over the pixels' bytes as they are read, so
    /// the data is written once, straight after the header, never held
    /// twice (a model is as large as its generators: on a large torus this
    /// halves what saving it needs).
    pub fn to_bytes(&self) -> Vec<u8> {
        let pixels = || self.generators.iter().flat_map(|g| g.pixels.iter());
        let mut hash = Fnv1a64::new();
        for v in pixels() {
            hash.write(&v.to_le_bytes());
        }
        let header = Header {
            settings: self.settings.clone(),
            height: self.height,
            width: self.width,
            generators: self.generators.len(),
            checksum: format!("{:016x}", hash.finish()),
            written_by: format!("orbitspan {}", env!("CARGO_PKG_VERSION")),
        };
        let json = serde_json::to_vec(&header).expect("header serialises");
        let start = 16 + json.len();
        let length = start + 8 * self.generators.len() * self.height * self.width;
        let mut out = Vec::with_capacity(length);
        out.extend_from_slice(MAGIC);
        out.extend_from_slice(&VERSION.to_le_bytes());
        out.extend_from_slice(&(json.len() as u32).to_le_bytes());
        out.extend_from_slice(&json);
        out.resize(length, 0);
        for (chunk, v) in out[start..].chunks_exact_mut(8).zip(pixels()) {
            chunk.copy_from_slice(&v.to_le_bytes());
        }
        out
    }

    /// Reads a model; errors name `source` and say what is wrong.
    pub fn from_bytes(source: &str, bytes: &[u8]) -> Result<Model> {
        let bad = |p: String| Error::file(source, p);
        if bytes.len() < 16 || &bytes[..8] != MAGIC {
            return Err(bad("not an orbitspan model file (missing the OSPMODEL signature)".into()));
        }
        let version = u32::from_le_bytes(bytes[8..12].try_into().unwrap());
        if version != VERSION {
            return Err(bad(format!("model format version {version} is not supported (this program reads version {VERSION})")));
        }
        let hlen = u32::from_le_bytes(bytes[12..16].try_into().unwrap()) as usize;
        let json = bytes.get(16..16 + hlen).ok_or_else(|| bad("truncated model: the header is cut short".into()))?;
        let header: Header =
            serde_json::from_slice(json).map_err(|e| bad(format!("corrupt model header: {e}")))?;
        let count = header.generators;
        let expected = (count as u128) * (header.height as u128) * (header.width as u128) * 8;
        let data = &bytes[16 + hlen..];
        if data.len() as u128 != expected {
            return Err(bad(format!(
                "truncated or padded model: expected {expected} bytes of generator data, found {}",
                data.len()
            )));
        }
        if format!("{:016x}", fnv1a64(data)) != header.checksum {
            return Err(bad("corrupt model: the generator data does not match its checksum".into()));
        }
        let px = header.height * header.width;
        let generators = (0..count)
            .map(|k| {
                let pixels = data[k * px * 8..(k + 1) * px * 8]
                    .chunks_exact(8)
                    .map(|c| f64::from_le_bytes(c.try_into().unwrap()))
                    .collect();
                Image::new(header.height, header.width, pixels)
            })
            .collect();
        Model::new(header.settings, header.height, header.width, generators).map_err(|e| bad(format!("invalid model: {e}")))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Projections make the generators' spectra once and keep them;
    /// forgetting them drops them, and the next projection, making them
    /// again, gives the same image.
    #[test]
    fn forgotten_spectra_are_made_again() {
        let settings = FitSettings {
            group: crate::plane_group::PlaneGroup::parse("p2").unwrap(),
            cell_rows: 2,
            cell_cols: 2,
            origin: [0, 0],
            generators: 1,
            band: None,
            lattice_coords: false,
        };
        let generator = Image::new(4, 4, (0..16).map(|i| ((i * 5) % 7) as f64 / 7.0).collect());
        let mut model = Model::new(settings, 4, 4, vec![generator]).unwrap();
        let image = Image::new(4, 4, (0..16).map(|i| ((i * 3) % 11) as f64).collect());
        assert!(model.spectra.get().is_none());
        let first = model.project(&image).unwrap();
        assert!(model.spectra.get().is_some());
        model.forget_spectra();
        assert!(model.spectra.get().is_none());
        assert_eq!(model.project(&image).unwrap().pixels, first.pixels);
    }

    /// FNV-1a 64 against the published test vectors of its authors
    /// (Fowler, Noll, Vo: "" → cbf29ce484222325, "a" → af63dc4c8601ec8c,
    /// "foobar" → 85944171f73967e8; values from memory, and recomputed here
    /// by a separate three-line Python implementation), and fed in pieces
    /// as [`Model::to_bytes`] feeds it.
    #[test]
    fn checksum_is_fnv1a64() {
        for (text, want) in [("", 0xcbf2_9ce4_8422_2325u64), ("a", 0xaf63_dc4c_8601_ec8c), ("foobar", 0x8594_4171_f739_67e8)] {
            assert_eq!(fnv1a64(text.as_bytes()), want, "{text:?}");
        }
        let bytes: Vec<u8> = (0..1000u32).map(|i| (i * 37 % 251) as u8).collect();
        let mut pieces = Fnv1a64::new();
        for chunk in bytes.chunks(7) {
            pieces.write(chunk);
        }
        assert_eq!(pieces.finish(), fnv1a64(&bytes));
    }
}
