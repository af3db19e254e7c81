//! Image files through the public API: reading from disk, a hand-made
//! planar TIFF, and a sweep of damaged files that must give errors, never
//! panics.

use orbitspan_core::image_io::{decode, read_path, DecodeLimits};
use std::io::Cursor;

fn grey_png(width: u32, height: u32) -> Vec<u8> {
    let img = image::ImageBuffer::from_fn(width, height, |x, y| image::Luma([(x * 7 + y * 13) as u8]));
    let mut out = Cursor::new(Vec::new());
    img.write_to(&mut out, image::ImageFormat::Png).unwrap();
    out.into_inner()
}

/// A scratch directory for this test process.
fn scratch_dir(test: &str) -> std::path::PathBuf {
    let dir = std::env::temp_dir().join(format!("orbitspan-io-{}-{test}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    dir
}

#[test]
fn read_path_reads_a_file_and_labels_it_with_the_path() {
    let dir = scratch_dir("read");
    let path = dir.join("grid.png");
    std::fs::write(&path, grey_png(5, 3)).unwrap();
    let images = read_path(&path, &DecodeLimits::default()).unwrap();
    std::fs::remove_dir_all(&dir).unwrap();
    assert_eq!(images.len(), 1);
    assert_eq!(images[0].0, path.display().to_string());
    let image = &images[0].1;
    assert_eq!((image.height, image.width), (3, 5));
    assert_eq!(image.at(2, 4), f64::from(4 * 7 + 2 * 13) / 255.0);
}

#[test]
fn missing_file_is_named_in_the_error() {
    let path = std::env::temp_dir().join("orbitspan-io-no-such-file.png");
    let msg = read_path(&path, &DecodeLimits::default()).unwrap_err().to_string();
    assert!(msg.starts_with(&format!("{}: cannot read the file: ", path.display())), "{msg}");
}

/// A little-endian TIFF, 2 x 1 pixels RGB 8-bit with PlanarConfiguration 2
/// (one strip per colour plane), per TIFF 6.0 section 8 and the
/// PlanarConfiguration field description.
fn planar_rgb_tiff(red: [u8; 2], green: [u8; 2], blue: [u8; 2]) -> Vec<u8> {
    let entries = 10u32;
    let ifd_end = 8 + 2 + entries * 12 + 4;
    let offsets_at = ifd_end; // 3 LONG strip offsets
    let counts_at = offsets_at + 12; // 3 LONG strip byte counts
    let data_at = counts_at + 12; // 3 strips of 2 bytes
    let table: [(u16, u16, u32, u32); 10] = [
        (256, 3, 1, 2),             // ImageWidth
        (257, 3, 1, 1),             // ImageLength
        (258, 3, 1, 8),             // BitsPerSample
        (259, 3, 1, 1),             // Compression: none
        (262, 3, 1, 2),             // PhotometricInterpretation: RGB
        (273, 4, 3, offsets_at),    // StripOffsets
        (277, 3, 1, 3),             // SamplesPerPixel
        (278, 3, 1, 1),             // RowsPerStrip
        (279, 4, 3, counts_at),     // StripByteCounts
        (284, 3, 1, 2),             // PlanarConfiguration: planar
    ];
    let mut out = b"II*\0".to_vec();
    out.extend_from_slice(&8u32.to_le_bytes());
    out.extend_from_slice(&(entries as u16).to_le_bytes());
    for (tag, kind, count, value) in table {
        out.extend_from_slice(&tag.to_le_bytes());
        out.extend_from_slice(&kind.to_le_bytes());
        out.extend_from_slice(&count.to_le_bytes());
        if kind == 3 && count == 1 {
            out.extend_from_slice(&(value as u16).to_le_bytes());
            out.extend_from_slice(&[0, 0]);
        } else {
            out.extend_from_slice(&value.to_le_bytes());
        }
    }
    out.extend_from_slice(&0u32.to_le_bytes());
    for plane in 0..3u32 {
        out.extend_from_slice(&(data_at + 2 * plane).to_le_bytes());
    }
    for _ in 0..3 {
        out.extend_from_slice(&2u32.to_le_bytes());
    }
    for plane in [red, green, blue] {
        out.extend_from_slice(&plane);
    }
    out
}

#[test]
fn planar_rgb_tiff_becomes_rec709_luminance() {
    let bytes = planar_rgb_tiff([255, 10], [0, 200], [0, 90]);
    let images = decode("planar.tif", &bytes, &DecodeLimits::default()).unwrap();
    let image = &images[0].1;
    assert_eq!((image.height, image.width), (1, 2));
    // Rec. 709 luma weights (ITU-R BT.709, from memory).
    assert!((image.pixels[0] - 0.2126).abs() < 1e-15, "{}", image.pixels[0]);
    let mixed = (0.2126 * 10.0 + 0.7152 * 200.0 + 0.0722 * 90.0) / 255.0;
    assert!((image.pixels[1] - mixed).abs() < 1e-15, "{}", image.pixels[1]);
}

/// Files damaged in every way a short sweep can reach: each truncation
/// length, and single bytes overwritten across the file. Each must decode or
/// give an error naming the file; none may panic.
fn damaged_versions(good: &[u8]) -> Vec<Vec<u8>> {
    let mut out: Vec<Vec<u8>> = (1..good.len()).map(|n| good[..n].to_vec()).collect();
    for i in 0..good.len() {
        for value in [0x00u8, 0xFF, good[i] ^ 0x55] {
            let mut bad = good.to_vec();
            bad[i] = value;
            out.push(bad);
        }
    }
    out
}

fn assert_no_panic(name: &str, good: &[u8]) {
    let limits = DecodeLimits { max_pixels: 1 << 20 };
    for (k, bad) in damaged_versions(good).iter().enumerate() {
        let outcome = std::panic::catch_unwind(|| decode(name, bad, &limits));
        match outcome {
            Ok(Ok(images)) => assert!(!images.is_empty(), "{name} version {k}: no images and no error"),
            Ok(Err(e)) => assert!(e.to_string().starts_with(&format!("{name}: ")), "{name} version {k}: {e}"),
            Err(_) => panic!("{name} version {k}: decoder panicked"),
        }
    }
}

#[test]
fn damaged_png_never_panics() {
    assert_no_panic("bad.png", &grey_png(6, 4));
}

#[test]
fn damaged_jpeg_never_panics() {
    let img = image::ImageBuffer::from_fn(16, 8, |x, y| image::Luma([(x * 9 + y * 5) as u8]));
    let mut out = Cursor::new(Vec::new());
    img.write_to(&mut out, image::ImageFormat::Jpeg).unwrap();
    assert_no_panic("bad.jpg", &out.into_inner());
}

#[test]
fn damaged_tiff_never_panics() {
    let mut out = Cursor::new(Vec::new());
    let mut encoder = tiff::encoder::TiffEncoder::new(&mut out).unwrap();
    encoder.write_image::<tiff::encoder::colortype::Gray16>(3, 2, &[1, 2, 3, 4, 5, 6]).unwrap();
    encoder.write_image::<tiff::encoder::colortype::Gray32Float>(3, 2, &[0.5; 6]).unwrap();
    assert_no_panic("bad.tif", &out.into_inner());
    assert_no_panic("planar.tif", &planar_rgb_tiff([1, 2], [3, 4], [5, 6]));
}
