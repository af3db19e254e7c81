//! Reading image files (PNG, JPEG, TIFF) into grey-level [`Image`]s.
//!
//! Intensity scaling (MATH.md §1): integer samples are read as
//! `value / max_value`, so they lie in [0, 1] (`max_value = 2^bits − 1`:
//! 255 for 8-bit, 65535 for 16-bit files); floating-point samples are kept
//! as they are. Colour pixels become one grey value by the Rec. 709 luma
//! weights `Y = 0.2126 R + 0.7152 G + 0.0722 B`, applied to the stored
//! (gamma-encoded, not linearised) sample values; any alpha channel is
//! ignored. No colour profile, gamma chunk or orientation tag is applied.
//!
//! The format is recognised from the first bytes of the file (its magic
//! number), never from the file name. Each image's size is read from its
//! header and checked against [`DecodeLimits::max_pixels`] before any pixel
//! data is decoded. Every problem comes back as [`Error::file`] naming the
//! file (and the page of a multi-page TIFF) and what is wrong.

use crate::error::{Error, Result};
use crate::stack::Image;
use std::io::Cursor;
use std::path::Path;

/// Rec. 709 luma weights for red, green and blue (ITU-R BT.709).
const REC709: [f64; 3] = [0.2126, 0.7152, 0.0722];

/// Limits checked against each image's header before its pixels are decoded.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct DecodeLimits {
    /// Largest number of pixels (`width * height`) accepted for one image
    /// (one page of a multi-page TIFF).
    pub max_pixels: u64,
}

impl Default for DecodeLimits {
    /// 64 million pixels, e.g. 8000 x 8000.
    fn default() -> Self {
        DecodeLimits { max_pixels: 64_000_000 }
    }
}

/// The container formats we read, recognised by their magic bytes.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
enum Format {
    Png,
    Jpeg,
    Tiff,
}

impl Format {
    fn name(self) -> &'static str {
        match self {
            Format::Png => "PNG",
            Format::Jpeg => "JPEG",
            Format::Tiff => "TIFF",
        }
    }

    /// PNG: `89 50 4E 47 0D 0A 1A 0A`; JPEG: `FF D8 FF`; TIFF: `II*\0` or
    /// `MM\0*` (classic) and `II+\0` or `MM\0+` (BigTIFF).
    fn sniff(bytes: &[u8]) -> Option<Format> {
        if bytes.starts_with(b"\x89PNG\r\n\x1a\n") {
            Some(Format::Png)
        } else if bytes.starts_with(&[0xFF, 0xD8, 0xFF]) {
            Some(Format::Jpeg)
        } else if [b"II*\0", b"MM\0*", b"II+\0", b"MM\0+"].iter().any(|m| bytes.starts_with(*m)) {
            Some(Format::Tiff)
        } else {
            None
        }
    }
}

/// Decodes the PNG, JPEG or TIFF file `bytes` (named `name` in labels and
/// errors) into grey-level images.
///
/// - Integer samples (PNG and JPEG 8/16-bit, TIFF 8/16/32/64-bit unsigned)
///   become `value / max_value` in [0, 1]; TIFF 16/32/64-bit float samples are
///   kept as they are and must be finite (a NaN or infinity is an error
///   naming the page, row and column).
/// - Colour becomes luminance `0.2126 R + 0.7152 G + 0.0722 B` of the stored,
///   non-linearised values (Rec. 709 weights); alpha is ignored.
/// - A single image is labelled `name`; the pages of a multi-page TIFF are
///   labelled `name#1`, `name#2`, … (1-based).
///
/// Each image's header size is checked against `limits` before its pixel
/// data is decoded. Never panics on bad input: every problem is an
/// [`Error::file`] naming `name`.
pub fn decode(name: &str, bytes: &[u8], limits: &DecodeLimits) -> Result<Vec<(String, Image)>> {
    if bytes.is_empty() {
        return Err(Error::file(name, "file is empty (0 bytes)"));
    }
    let format = Format::sniff(bytes).ok_or_else(|| {
        let head: Vec<String> = bytes.iter().take(4).map(|b| format!("{b:02x}")).collect();
        Error::file(
            name,
            format!("not a PNG, JPEG or TIFF file (starts with bytes {})", head.join(" ")),
        )
    })?;
    match format {
        Format::Png => decode_raster(name, bytes, format, image::ImageFormat::Png, limits),
        Format::Jpeg => decode_raster(name, bytes, format, image::ImageFormat::Jpeg, limits),
        Format::Tiff => decode_tiff(name, bytes, limits),
    }
}

/// Reads the file at `path` and [`decode`]s it; labels and errors use the
/// path as given.
pub fn read_path(path: &Path, limits: &DecodeLimits) -> Result<Vec<(String, Image)>> {
    let name = path.display().to_string();
    let bytes = std::fs::read(path).map_err(|e| Error::file(&name, format!("cannot read the file: {e}")))?;
    decode(&name, &bytes, limits)
}

/// Refuses a header size above the limit (or with no pixels) before decoding.
fn check_size(width: u64, height: u64, limits: &DecodeLimits) -> std::result::Result<(), String> {
    if width == 0 || height == 0 {
        return Err(format!("header declares {height} x {width} pixels (height x width): the image has no pixels"));
    }
    let pixels = width.saturating_mul(height);
    if pixels > limits.max_pixels {
        return Err(format!(
            "header declares {height} x {width} pixels (height x width, {}), above the limit of {}; \
             raise the limit or crop the image",
            megapixels(pixels),
            megapixels(limits.max_pixels)
        ));
    }
    Ok(())
}

/// A pixel count for messages: in millions (`64 Mpx`, `1.3 Mpx`), or as a
/// plain count below 100 000 pixels.
fn megapixels(pixels: u64) -> String {
    if pixels < 100_000 {
        format!("{pixels} pixels")
    } else if pixels % 1_000_000 == 0 {
        format!("{} Mpx", pixels / 1_000_000)
    } else {
        format!("{:.1} Mpx", pixels as f64 / 1e6)
    }
}

/// PNG and JPEG through the `image` crate: header first, then pixels.
fn decode_raster(
    name: &str,
    bytes: &[u8],
    format: Format,
    image_format: image::ImageFormat,
    limits: &DecodeLimits,
) -> Result<Vec<(String, Image)>> {
    use image::ImageDecoder;
    let corrupt = |e: image::ImageError| Error::file(name, format!("truncated or corrupt {} data: {e}", format.name()));
    let mut reader = image::ImageReader::with_format(Cursor::new(bytes), image_format);
    let mut decoder_limits = image::Limits::default();
    // Room for the decoded buffer of an image at the pixel limit (up to 4
    // channels of 32-bit samples) plus the decoder's working memory.
    decoder_limits.max_alloc = Some(limits.max_pixels.saturating_mul(16).saturating_add(64 << 20));
    reader.limits(decoder_limits);
    let decoder = reader.into_decoder().map_err(corrupt)?;
    let (width, height) = decoder.dimensions();
    check_size(u64::from(width), u64::from(height), limits).map_err(|p| Error::file(name, p))?;
    let decoded = image::DynamicImage::from_decoder(decoder).map_err(corrupt)?;
    let image = luminance_of(decoded);
    Ok(vec![(name.to_string(), image)])
}

/// Grey values of a decoded PNG/JPEG image (see the module doc for scaling).
fn luminance_of(decoded: image::DynamicImage) -> Image {
    use image::DynamicImage as D;
    let (width, height) = (decoded.width() as usize, decoded.height() as usize);
    let pixels: Vec<f64> = match decoded {
        D::ImageLuma8(b) => b.as_raw().iter().map(|&v| f64::from(v) / 255.0).collect(),
        D::ImageLumaA8(b) => b.as_raw().chunks_exact(2).map(|p| f64::from(p[0]) / 255.0).collect(),
        D::ImageLuma16(b) => b.as_raw().iter().map(|&v| f64::from(v) / 65535.0).collect(),
        D::ImageLumaA16(b) => b.as_raw().chunks_exact(2).map(|p| f64::from(p[0]) / 65535.0).collect(),
        D::ImageRgb8(b) => rgb_luma(b.as_raw(), 3, 255.0),
        D::ImageRgba8(b) => rgb_luma(b.as_raw(), 4, 255.0),
        D::ImageRgb16(b) => rgb_luma(b.as_raw(), 3, 65535.0),
        D::ImageRgba16(b) => rgb_luma(b.as_raw(), 4, 65535.0),
        D::ImageRgb32F(b) => rgb_luma(b.as_raw(), 3, 1.0),
        D::ImageRgba32F(b) => rgb_luma(b.as_raw(), 4, 1.0),
        other => rgb_luma(other.to_rgba32f().as_raw(), 4, 1.0),
    };
    Image::new(height, width, pixels)
}

/// Rec. 709 luminance of interleaved samples with `stride` channels (RGB
/// first), each divided by `max`.
fn rgb_luma<T: Copy + Into<f64>>(samples: &[T], stride: usize, max: f64) -> Vec<f64> {
    samples
        .chunks_exact(stride)
        .map(|p| (REC709[0] * p[0].into() + REC709[1] * p[1].into() + REC709[2] * p[2].into()) / max)
        .collect()
}

/// All pages of a TIFF file, each checked against the limit before decoding.
fn decode_tiff(name: &str, bytes: &[u8], limits: &DecodeLimits) -> Result<Vec<(String, Image)>> {
    let corrupt = |page: Option<usize>, e: tiff::TiffError| {
        let problem = match e {
            tiff::TiffError::UnsupportedError(u) => format!("unsupported TIFF variant: {u}"),
            other => format!("truncated or corrupt TIFF data: {other}"),
        };
        match page {
            Some(p) => Error::file(name, format!("page {p}: {problem}")),
            None => Error::file(name, problem),
        }
    };
    let mut tiff_limits = tiff::decoder::Limits::default();
    // One decoded page at the pixel limit: up to 4 samples of 64 bits each.
    tiff_limits.decoding_buffer_size =
        usize::try_from(limits.max_pixels.saturating_mul(32)).unwrap_or(usize::MAX);
    let mut decoder = tiff::decoder::Decoder::new(Cursor::new(bytes))
        .map_err(|e| corrupt(None, e))?
        .with_limits(tiff_limits);
    let mut pages = Vec::new();
    let mut page = 1;
    loop {
        let image = decode_tiff_page(&mut decoder, limits)
            .map_err(|e| match e {
                PageError::Tiff(t) => corrupt(Some(page), t),
                PageError::Problem(p) => Error::file(name, format!("page {page}: {p}")),
            })?;
        pages.push(image);
        if !decoder.more_images() {
            break;
        }
        page += 1;
        decoder.next_image().map_err(|e| corrupt(Some(page), e))?;
    }
    let single = pages.len() == 1;
    Ok(pages
        .into_iter()
        .enumerate()
        .map(|(i, image)| (if single { name.to_string() } else { format!("{name}#{}", i + 1) }, image))
        .collect())
}

/// Why one TIFF page could not be read.
enum PageError {
    Tiff(tiff::TiffError),
    Problem(String),
}

impl From<tiff::TiffError> for PageError {
    fn from(e: tiff::TiffError) -> Self {
        PageError::Tiff(e)
    }
}

/// How the samples of one decoded TIFF page are laid out.
#[derive(Clone, Copy)]
struct PageLayout {
    pixels: usize,
    width: usize,
    /// Samples per pixel (colour and extra samples such as alpha).
    channels: usize,
    /// The first three samples are R, G, B (else the first is grey).
    rgb: bool,
    /// One plane per channel (PlanarConfiguration 2) instead of interleaved.
    planar: bool,
}

/// The current page of `decoder`: header size checked first, then decoded.
fn decode_tiff_page(
    decoder: &mut tiff::decoder::Decoder<Cursor<&[u8]>>,
    limits: &DecodeLimits,
) -> std::result::Result<Image, PageError> {
    use tiff::decoder::DecodingResult as R;
    use tiff::ColorType as C;
    let (width, height) = decoder.dimensions()?;
    check_size(u64::from(width), u64::from(height), limits).map_err(PageError::Problem)?;
    let colour = decoder.colortype()?;
    let (channels, rgb) = match colour {
        C::Gray(_) => (1, false),
        C::GrayA(_) => (2, false),
        // Grey with extra samples (alpha or others): the first sample is grey.
        C::Multiband { num_samples, .. } => (usize::from(num_samples), false),
        C::RGB(_) => (3, true),
        C::RGBA(_) => (4, true),
        other => {
            return Err(PageError::Problem(format!(
                "colour type {other:?} is not supported; save the image as grey or RGB"
            )))
        }
    };
    let bits = colour.bit_depth();
    let mut result = R::U8(Vec::new());
    let buffer = decoder.read_image_to_buffer(&mut result)?;
    let (width, height) = (width as usize, height as usize);
    let planar = buffer.planes > 1;
    if planar && buffer.planes != channels {
        return Err(PageError::Problem(format!(
            "{} sample planes for {channels} samples per pixel",
            buffer.planes
        )));
    }
    let layout = PageLayout { pixels: width * height, width, channels, rgb, planar };
    let unsupported_depth = || {
        PageError::Problem(format!(
            "{bits}-bit integer samples are not supported; save as 8-, 16- or 32-bit or as float"
        ))
    };
    let pixels = match result {
        R::U8(v) if bits == 8 => page_luminance(&v, |x| f64::from(x) / 255.0, layout),
        R::U16(v) if bits == 16 => page_luminance(&v, |x| f64::from(x) / 65535.0, layout),
        R::U32(v) if bits == 32 => page_luminance(&v, |x| f64::from(x) / 4_294_967_295.0, layout),
        R::U64(v) if bits == 64 => page_luminance(&v, |x| x as f64 / u64::MAX as f64, layout),
        R::U8(_) | R::U16(_) | R::U32(_) | R::U64(_) => return Err(unsupported_depth()),
        R::F16(v) => page_luminance(&v, |x| x.to_f64(), layout),
        R::F32(v) => page_luminance(&v, f64::from, layout),
        R::F64(v) => page_luminance(&v, |x| x, layout),
        R::I8(_) | R::I16(_) | R::I32(_) | R::I64(_) => {
            return Err(PageError::Problem(
                "signed integer samples are not supported; save as unsigned integer or float".into(),
            ))
        }
    }
    .map_err(PageError::Problem)?;
    Ok(Image::new(height, width, pixels))
}

/// Grey values of one page: `value` scales a sample, colour pages are
/// reduced to Rec. 709 luminance. A sample that is not finite is an error
/// naming its position.
fn page_luminance<T: Copy>(
    data: &[T],
    value: impl Fn(T) -> f64,
    layout: PageLayout,
) -> std::result::Result<Vec<f64>, String> {
    let PageLayout { pixels, width, channels, rgb, planar } = layout;
    if data.len() < pixels * channels {
        return Err(format!(
            "decoded {} samples, expected {} ({} pixels x {channels} samples)",
            data.len(),
            pixels * channels,
            pixels
        ));
    }
    let sample = |p: usize, c: usize| -> std::result::Result<f64, String> {
        let v = value(data[if planar { c * pixels + p } else { p * channels + c }]);
        if v.is_finite() {
            return Ok(v);
        }
        let what = if v.is_nan() { "NaN" } else if v > 0.0 { "+infinity" } else { "-infinity" };
        let channel = if rgb { [" in the red sample", " in the green sample", " in the blue sample"][c] } else { "" };
        Err(format!("{what}{channel} at row {}, column {}", p / width, p % width))
    };
    (0..pixels)
        .map(|p| {
            if rgb {
                Ok(REC709[0] * sample(p, 0)? + REC709[1] * sample(p, 1)? + REC709[2] * sample(p, 2)?)
            } else {
                sample(p, 0)
            }
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use image::{ImageBuffer, ImageFormat, Luma, Rgb};

    fn encode<P: image::PixelWithColorType>(img: &ImageBuffer<P, Vec<P::Subpixel>>, format: ImageFormat) -> Vec<u8>
    where
        [P::Subpixel]: image::EncodableLayout,
    {
        let mut out = Cursor::new(Vec::new());
        img.write_to(&mut out, format).unwrap();
        out.into_inner()
    }

    fn decode_one(name: &str, bytes: &[u8]) -> Image {
        let mut images = decode(name, bytes, &DecodeLimits::default()).unwrap();
        assert_eq!(images.len(), 1);
        assert_eq!(images[0].0, name);
        images.remove(0).1
    }

    fn error_of(name: &str, bytes: &[u8]) -> String {
        decode(name, bytes, &DecodeLimits::default()).unwrap_err().to_string()
    }

    /// A small 8-bit grey PNG with every value 0..=255 once (16 x 16).
    fn grey8_png() -> Vec<u8> {
        let img = ImageBuffer::from_fn(16, 16, |x, y| Luma([(y * 16 + x) as u8]));
        encode(&img, ImageFormat::Png)
    }

    /// The bytes of one PNG chunk: length, type, data, CRC-32 of type + data.
    fn png_chunk(kind: &[u8; 4], data: &[u8]) -> Vec<u8> {
        let mut crc = crc32fast::Hasher::new();
        crc.update(kind);
        crc.update(data);
        let mut out = (data.len() as u32).to_be_bytes().to_vec();
        out.extend_from_slice(kind);
        out.extend_from_slice(data);
        out.extend_from_slice(&crc.finalize().to_be_bytes());
        out
    }

    /// A PNG whose IHDR declares `width x height` 8-bit grey pixels, with a
    /// tiny IDAT that could never hold them.
    pub(super) fn png_declaring(width: u32, height: u32) -> Vec<u8> {
        let mut ihdr = width.to_be_bytes().to_vec();
        ihdr.extend_from_slice(&height.to_be_bytes());
        ihdr.extend_from_slice(&[8, 0, 0, 0, 0]); // depth 8, grey, deflate, filter 0, no interlace
        let mut png = b"\x89PNG\r\n\x1a\n".to_vec();
        png.extend(png_chunk(b"IHDR", &ihdr));
        png.extend(png_chunk(b"IDAT", &[0x78, 0x9c, 0x03, 0x00, 0x00, 0x00, 0x00, 0x01]));
        png.extend(png_chunk(b"IEND", &[]));
        png
    }

    fn tiff_bytes(write: impl FnOnce(&mut tiff::encoder::TiffEncoder<&mut Cursor<Vec<u8>>>)) -> Vec<u8> {
        let mut out = Cursor::new(Vec::new());
        let mut encoder = tiff::encoder::TiffEncoder::new(&mut out).unwrap();
        write(&mut encoder);
        out.into_inner()
    }

    #[test]
    fn grey8_png_reads_value_over_255() {
        let image = decode_one("ramp.png", &grey8_png());
        assert_eq!((image.height, image.width), (16, 16));
        for (i, v) in image.pixels.iter().enumerate() {
            assert_eq!(*v, i as f64 / 255.0, "pixel {i}");
        }
    }

    #[test]
    fn grey16_png_reads_value_over_65535() {
        let value = |x: u32, y: u32| (x * 4099 + y * 257 + 3) as u16;
        let img = ImageBuffer::from_fn(9, 5, |x, y| Luma([value(x, y)]));
        let image = decode_one("deep.png", &encode(&img, ImageFormat::Png));
        assert_eq!((image.height, image.width), (5, 9));
        assert_eq!(image.at(4, 8), f64::from(value(8, 4)) / 65535.0);
        for y in 0..5 {
            for x in 0..9 {
                assert_eq!(image.at(y as usize, x as usize), f64::from(value(x, y)) / 65535.0);
            }
        }
        // The largest value written, 8*4099 + 4*257 + 3 = 33823, well inside 16 bits.
        assert!(image.pixels.iter().any(|&v| v > 0.5));
    }

    #[test]
    fn rgb_png_becomes_rec709_luminance() {
        // Pure red, green, blue and one mixed colour.
        let colours = [[255u8, 0, 0], [0, 255, 0], [0, 0, 255], [10, 200, 90]];
        let img = ImageBuffer::from_fn(4, 1, |x, _| Rgb(colours[x as usize]));
        let image = decode_one("colour.png", &encode(&img, ImageFormat::Png));
        // ITU-R BT.709 luma coefficients 0.2126, 0.7152, 0.0722 (from memory).
        assert!((image.pixels[0] - 0.2126).abs() < 1e-15);
        assert!((image.pixels[1] - 0.7152).abs() < 1e-15);
        assert!((image.pixels[2] - 0.0722).abs() < 1e-15);
        let mixed = (0.2126 * 10.0 + 0.7152 * 200.0 + 0.0722 * 90.0) / 255.0;
        assert!((image.pixels[3] - mixed).abs() < 1e-15);
    }

    #[test]
    fn rgba_png_ignores_alpha() {
        let img = ImageBuffer::from_fn(2, 1, |x, _| image::Rgba([0u8, 255, 0, if x == 0 { 255 } else { 0 }]));
        let image = decode_one("alpha.png", &encode(&img, ImageFormat::Png));
        assert_eq!(image.pixels[0], image.pixels[1]);
        assert!((image.pixels[0] - 0.7152).abs() < 1e-15);
    }

    #[test]
    fn jpeg_decodes_to_its_size_and_roughly_its_values() {
        let img = ImageBuffer::from_fn(40, 24, |_, _| Luma([128u8]));
        let image = decode_one("photo.jpg", &encode(&img, ImageFormat::Jpeg));
        assert_eq!((image.height, image.width), (24, 40));
        // A flat grey survives lossy coding to within a few grey levels.
        for v in &image.pixels {
            assert!((v - 128.0 / 255.0).abs() < 3.0 / 255.0, "{v}");
        }
    }

    #[test]
    fn float32_tiff_keeps_values() {
        let data: Vec<f32> = (0..12).map(|i| i as f32 * 0.37 - 1.5).collect();
        let bytes = tiff_bytes(|e| e.write_image::<tiff::encoder::colortype::Gray32Float>(4, 3, &data).unwrap());
        let image = decode_one("float.tif", &bytes);
        assert_eq!((image.height, image.width), (3, 4));
        for (got, want) in image.pixels.iter().zip(&data) {
            assert_eq!(*got, f64::from(*want));
        }
        // Float values are not rescaled: negatives stay negative.
        assert_eq!(image.at(0, 0), -1.5);
    }

    #[test]
    fn float64_tiff_keeps_values() {
        let data: Vec<f64> = vec![1e-300, -2.5, 3.0e10, 0.1];
        let bytes = tiff_bytes(|e| e.write_image::<tiff::encoder::colortype::Gray64Float>(2, 2, &data).unwrap());
        assert_eq!(decode_one("double.tif", &bytes).pixels, data);
    }

    #[test]
    fn grey16_tiff_reads_value_over_65535() {
        let data: Vec<u16> = vec![0, 1, 1000, 65535, 32768, 7];
        let bytes = tiff_bytes(|e| e.write_image::<tiff::encoder::colortype::Gray16>(3, 2, &data).unwrap());
        let image = decode_one("deep.tif", &bytes);
        assert_eq!((image.height, image.width), (2, 3));
        let want: Vec<f64> = data.iter().map(|&v| f64::from(v) / 65535.0).collect();
        assert_eq!(image.pixels, want);
    }

    #[test]
    fn rgb8_tiff_becomes_rec709_luminance() {
        let data: Vec<u8> = vec![255, 0, 0, 10, 200, 90];
        let bytes = tiff_bytes(|e| e.write_image::<tiff::encoder::colortype::RGB8>(2, 1, &data).unwrap());
        let image = decode_one("colour.tif", &bytes);
        assert!((image.pixels[0] - 0.2126).abs() < 1e-15);
        let mixed = (0.2126 * 10.0 + 0.7152 * 200.0 + 0.0722 * 90.0) / 255.0;
        assert!((image.pixels[1] - mixed).abs() < 1e-15);
    }

    #[test]
    fn multi_page_tiff_gives_one_image_per_page() {
        let bytes = tiff_bytes(|e| {
            e.write_image::<tiff::encoder::colortype::Gray8>(2, 2, &[0, 51, 102, 255]).unwrap();
            e.write_image::<tiff::encoder::colortype::Gray8>(2, 2, &[255, 204, 153, 0]).unwrap();
        });
        let images = decode("pages.tif", &bytes, &DecodeLimits::default()).unwrap();
        assert_eq!(images.len(), 2);
        assert_eq!(images[0].0, "pages.tif#1");
        assert_eq!(images[1].0, "pages.tif#2");
        assert_eq!(images[0].1.pixels, vec![0.0, 0.2, 0.4, 1.0]);
        assert_eq!(images[1].1.pixels, vec![1.0, 0.8, 0.6, 0.0]);
    }

    #[test]
    fn empty_file_is_refused() {
        assert_eq!(error_of("blank.png", &[]), "blank.png: file is empty (0 bytes)");
    }

    #[test]
    fn text_named_png_is_refused_by_content() {
        assert_eq!(
            error_of("notes.png", b"hello, this is text"),
            "notes.png: not a PNG, JPEG or TIFF file (starts with bytes 68 65 6c 6c)"
        );
    }

    #[test]
    fn format_follows_content_not_name() {
        // A PNG named .tif is still read as PNG.
        let image = decode_one("misnamed.tif", &grey8_png());
        assert_eq!(image.at(1, 0), 16.0 / 255.0);
    }

    #[test]
    fn truncated_png_is_refused() {
        let png = grey8_png();
        let msg = error_of("half.png", &png[..png.len() / 2]);
        assert!(msg.starts_with("half.png: truncated or corrupt PNG data: "), "{msg}");
    }

    #[test]
    fn oversized_png_header_is_refused_before_decoding() {
        let msg = error_of("huge.png", &png_declaring(100_000, 100_000));
        assert_eq!(
            msg,
            "huge.png: header declares 100000 x 100000 pixels (height x width, 10000 Mpx), \
             above the limit of 64 Mpx; raise the limit or crop the image"
        );
    }

    #[test]
    fn limit_is_configurable() {
        let limits = DecodeLimits { max_pixels: 255 };
        let msg = decode("ramp.png", &grey8_png(), &limits).unwrap_err().to_string();
        assert!(msg.contains("16 x 16 pixels") && msg.contains("(height x width, 256 pixels), above the limit of 255 pixels"), "{msg}");
        assert!(decode("ramp.png", &grey8_png(), &DecodeLimits { max_pixels: 256 }).is_ok());
    }

    #[test]
    fn nan_in_float_tiff_names_page_and_position() {
        let mut second = vec![0.5f32; 12];
        second[2 * 4 + 1] = f32::NAN;
        let bytes = tiff_bytes(|e| {
            e.write_image::<tiff::encoder::colortype::Gray32Float>(4, 3, &[0.25f32; 12]).unwrap();
            e.write_image::<tiff::encoder::colortype::Gray32Float>(4, 3, &second).unwrap();
        });
        assert_eq!(error_of("scan.tif", &bytes), "scan.tif: page 2: NaN at row 2, column 1");
    }

    #[test]
    fn infinity_in_float_tiff_is_refused() {
        let bytes = tiff_bytes(|e| {
            e.write_image::<tiff::encoder::colortype::Gray32Float>(2, 1, &[0.0, f32::NEG_INFINITY]).unwrap()
        });
        assert_eq!(error_of("inf.tif", &bytes), "inf.tif: page 1: -infinity at row 0, column 1");
    }

    #[test]
    fn signed_tiff_is_refused_plainly() {
        let bytes = tiff_bytes(|e| e.write_image::<tiff::encoder::colortype::GrayI16>(2, 1, &[-1, 1]).unwrap());
        assert_eq!(
            error_of("signed.tif", &bytes),
            "signed.tif: page 1: signed integer samples are not supported; save as unsigned integer or float"
        );
    }

    #[test]
    fn truncated_tiff_is_refused() {
        let data: Vec<u16> = (0..4096).map(|v| v as u16).collect();
        let bytes = tiff_bytes(|e| e.write_image::<tiff::encoder::colortype::Gray16>(64, 64, &data).unwrap());
        let msg = error_of("cut.tif", &bytes[..bytes.len() / 2]);
        assert!(msg.starts_with("cut.tif: "), "{msg}");
        assert!(msg.contains("truncated or corrupt TIFF data"), "{msg}");
    }

    #[test]
    fn megapixels_are_written_plainly() {
        assert_eq!(megapixels(64_000_000), "64 Mpx");
        assert_eq!(megapixels(10_000_000_000), "10000 Mpx");
        assert_eq!(megapixels(1_260_000), "1.3 Mpx");
        assert_eq!(megapixels(255), "255 pixels");
    }
}
