//! Bad usage and bad input: each gives exit code 2 and one error line
//! `orbitspan: error: ...` naming the file (or option) and the problem, and
//! never a panic.

mod common;

use common::{fresh_dir, orbitspan, write_png, Run};
use std::ffi::OsString;
use std::path::{Path, PathBuf};

/// Exit code 2, the error prefix, the given words in the message, no panic.
fn assert_bad_input(run: &Run, words: &[&str]) {
    assert_eq!(run.code, Some(2), "exit code; stderr: {}", run.stderr);
    assert!(!run.stderr.contains("panicked") && !run.stderr.contains("internal error"), "{}", run.stderr);
    // Stage lines ("orbitspan: reading images") may come first; then one error line.
    let errors: Vec<&str> = run.stderr.lines().filter(|l| l.starts_with("orbitspan: error: ")).collect();
    assert_eq!(errors.len(), 1, "stderr: {}", run.stderr);
    let message = errors[0].to_lowercase();
    for word in words {
        assert!(message.contains(&word.to_lowercase()), "message lacks '{word}': {}", run.stderr);
    }
}

fn fit(extra: &[&str], images: &[&Path]) -> Run {
    let mut args: Vec<OsString> = vec!["fit".into()];
    args.extend(extra.iter().map(OsString::from));
    args.extend(images.iter().map(|p| p.as_os_str().to_owned()));
    orbitspan(args)
}

const P1: &[&str] = &["--group", "p1", "--generators", "1"];

fn path_text(p: &Path) -> String {
    p.display().to_string()
}

#[test]
fn truncated_png_names_the_file() {
    let dir = fresh_dir("truncated");
    let good = dir.join("good.png");
    write_png(&good, 32, 32);
    let bytes = std::fs::read(&good).unwrap();
    let cut = dir.join("cut.png");
    std::fs::write(&cut, &bytes[..bytes.len() / 2]).unwrap();
    assert_bad_input(&fit(P1, &[&cut]), &[&path_text(&cut)]);
}

#[test]
fn zero_byte_file_names_the_file() {
    let dir = fresh_dir("empty");
    let empty = dir.join("empty.png");
    std::fs::write(&empty, b"").unwrap();
    assert_bad_input(&fit(P1, &[&empty]), &[&path_text(&empty), "empty"]);
}

#[test]
fn text_file_renamed_png_names_the_file() {
    let dir = fresh_dir("text");
    let fake = dir.join("notes.png");
    std::fs::write(&fake, "measurement notes, not an image\n").unwrap();
    assert_bad_input(&fit(P1, &[&fake]), &[&path_text(&fake)]);
}

#[test]
fn missing_file_names_the_file() {
    let dir = fresh_dir("missing");
    let missing = dir.join("nowhere.png");
    assert_bad_input(&fit(P1, &[&missing]), &[&path_text(&missing)]);
}

#[test]
fn mismatched_sizes_name_the_odd_file() {
    let dir = fresh_dir("sizes");
    let (a, b) = (dir.join("a.png"), dir.join("b.png"));
    write_png(&a, 8, 8);
    write_png(&b, 8, 6);
    assert_bad_input(&fit(P1, &[&a, &b]), &[&path_text(&b), "8x6", "8x8"]);
}

fn square_128(name: &str) -> PathBuf {
    let dir = fresh_dir(name);
    let path = dir.join("square.png");
    write_png(&path, 128, 128);
    path
}

#[test]
fn cell_not_dividing_the_size_is_refused() {
    let image = square_128("cell");
    let run = fit(&["--group", "p4m", "--cell", "7x7", "--generators", "1"], &[&image]);
    assert_bad_input(&run, &["7", "128"]);
}

#[test]
fn zero_generators_is_refused() {
    let image = square_128("zero");
    let run = fit(&["--group", "p4m", "--cell", "16x16", "--generators", "0"], &[&image]);
    assert_bad_input(&run, &["generators"]);
}

#[test]
fn more_generators_than_pixels_in_a_cell_is_refused() {
    // A 4x4 cell has 16 pixels, so at most 16 generators.
    let image = square_128("many");
    let run = fit(&["--group", "p1", "--cell", "4x4", "--generators", "17"], &[&image]);
    assert_bad_input(&run, &["17", "16"]);
}

#[test]
fn nan_in_a_float_tiff_names_the_file_and_pixel() {
    use tiff::encoder::{colortype::Gray32Float, TiffEncoder};
    let dir = fresh_dir("nan");
    let path = dir.join("scan.tif");
    let (width, height) = (6u32, 4u32);
    let mut data: Vec<f32> = (0..width * height).map(|i| i as f32 / 24.0).collect();
    data[(2 * width + 3) as usize] = f32::NAN; // row 2, column 3
    let file = std::fs::File::create(&path).unwrap();
    TiffEncoder::new(file).unwrap().write_image::<Gray32Float>(width, height, &data).unwrap();
    assert_bad_input(&fit(P1, &[&path]), &[&path_text(&path), "nan"]);
}

/// CRC-32 (ISO-HDLC, the PNG chunk checksum), bit by bit.
fn crc32(bytes: &[u8]) -> u32 {
    let mut crc = 0xFFFF_FFFFu32;
    for &b in bytes {
        crc ^= b as u32;
        for _ in 0..8 {
            crc = if crc & 1 != 0 { (crc >> 1) ^ 0xEDB8_8320 } else { crc >> 1 };
        }
    }
    !crc
}

fn png_chunk(kind: &[u8; 4], data: &[u8]) -> Vec<u8> {
    let mut out = (data.len() as u32).to_be_bytes().to_vec();
    let mut body = kind.to_vec();
    body.extend_from_slice(data);
    out.extend_from_slice(&body);
    out.extend_from_slice(&crc32(&body).to_be_bytes());
    out
}

#[test]
fn crc32_matches_the_standard_check_value() {
    // The CRC-32 check value of "123456789" is 0xCBF43926 (common practice:
    // the catalogue value quoted for CRC-32/ISO-HDLC).
    assert_eq!(crc32(b"123456789"), 0xCBF4_3926);
}

#[test]
fn huge_declared_size_is_refused_before_decoding() {
    let dir = fresh_dir("huge");
    let path = dir.join("huge.png");
    let mut ihdr = Vec::new();
    ihdr.extend_from_slice(&100_000u32.to_be_bytes()); // width
    ihdr.extend_from_slice(&100_000u32.to_be_bytes()); // height
    ihdr.extend_from_slice(&[8, 0, 0, 0, 0]); // 8-bit grey, deflate, no filter, no interlace
    let mut png = b"\x89PNG\r\n\x1a\n".to_vec();
    png.extend(png_chunk(b"IHDR", &ihdr));
    // The start of a zlib stream: decoders read the header up to the first IDAT.
    png.extend(png_chunk(b"IDAT", &[0x78, 0x9c, 0x63, 0x00, 0x00]));
    png.extend(png_chunk(b"IEND", &[]));
    std::fs::write(&path, &png).unwrap();
    assert_bad_input(&fit(P1, &[&path]), &[&path_text(&path), "100000"]);
}

#[test]
fn corrupt_model_names_the_model_file() {
    let dir = fresh_dir("model");
    let image = dir.join("a.png");
    write_png(&image, 16, 16);
    let model = dir.join("broken.orbitspan-model");
    std::fs::write(&model, b"OSPMODEL\x01\x00\x00\x00\xff\xff\x00\x00{\"settings\":").unwrap();
    let run = orbitspan([
        OsString::from("apply"),
        "--model".into(),
        model.clone().into_os_string(),
        "--out".into(),
        dir.join("out").into_os_string(),
        image.into_os_string(),
    ]);
    assert_bad_input(&run, &[&path_text(&model)]);
}

#[test]
fn unknown_option_prints_usage() {
    let dir = fresh_dir("option");
    let image = dir.join("a.png");
    write_png(&image, 16, 16);
    let run = fit(&["--group", "p1", "--generators", "1", "--colour-map", "jet"], &[&image]);
    assert_bad_input(&run, &["unknown option", "--colour-map"]);
    assert!(run.stderr.contains("Usage: orbitspan fit"), "{}", run.stderr);
    assert!(run.stdout.is_empty());
}

#[test]
fn unwritable_output_folder_names_the_path() {
    let dir = fresh_dir("unwritable");
    let image = dir.join("a.png");
    write_png(&image, 16, 16);
    // A file where the output folder should be.
    let blocker = dir.join("taken");
    std::fs::write(&blocker, b"a file").unwrap();
    let out = blocker.join("out");
    let run = fit(&["--group", "p1", "--generators", "1", "--out", &path_text(&out)], &[&image]);
    assert_bad_input(&run, &[&path_text(&out)]);
}
