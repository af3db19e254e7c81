//! The pixel limit is applied from the header, before pixel buffers exist.
//!
//! A counting global allocator records the largest single allocation made
//! while decoding a file whose header declares 100 000 x 100 000 pixels
//! (10 GB at one byte a pixel); the decode must fail with the limit message
//! after allocating no more than a few megabytes.

use orbitspan_core::image_io::{decode, DecodeLimits};
use std::alloc::{GlobalAlloc, Layout, System};
use std::cell::Cell;
use std::sync::atomic::{AtomicUsize, Ordering};
use std::sync::Mutex;

struct Counting;

thread_local! {
    /// Only the measuring thread records: other tests of this binary run on
    /// other threads at the same time and must not enter the record.
    static RECORDING: Cell<bool> = const { Cell::new(false) };
}
static LARGEST: AtomicUsize = AtomicUsize::new(0);
/// Tests that measure run one at a time so the record is their own.
static ONE_AT_A_TIME: Mutex<()> = Mutex::new(());

fn recording() -> bool {
    RECORDING.try_with(Cell::get).unwrap_or(false)
}

unsafe impl GlobalAlloc for Counting {
    unsafe fn alloc(&self, layout: Layout) -> *mut u8 {
        if recording() {
            LARGEST.fetch_max(layout.size(), Ordering::Relaxed);
        }
        System.alloc(layout)
    }
    unsafe fn dealloc(&self, ptr: *mut u8, layout: Layout) {
        System.dealloc(ptr, layout)
    }
    unsafe fn realloc(&self, ptr: *mut u8, layout: Layout, new_size: usize) -> *mut u8 {
        if recording() {
            LARGEST.fetch_max(new_size, Ordering::Relaxed);
        }
        System.realloc(ptr, layout, new_size)
    }
}

#[global_allocator]
static ALLOCATOR: Counting = Counting;

/// Runs `f` and returns its result with the largest allocation it made.
fn largest_allocation<T>(f: impl FnOnce() -> T) -> (T, usize) {
    let _guard = ONE_AT_A_TIME.lock().unwrap_or_else(|e| e.into_inner());
    LARGEST.store(0, Ordering::SeqCst);
    RECORDING.with(|r| r.set(true));
    let out = f();
    RECORDING.with(|r| r.set(false));
    (out, LARGEST.load(Ordering::SeqCst))
}

fn crc32(bytes: &[u8]) -> u32 {
    let mut h = crc32fast::Hasher::new();
    h.update(bytes);
    h.finalize()
}

/// A PNG chunk: big-endian length, type, data, CRC-32 over type and data
/// (PNG specification, W3C, section 5.3).
fn png_chunk(kind: &[u8; 4], data: &[u8]) -> Vec<u8> {
    let mut typed = kind.to_vec();
    typed.extend_from_slice(data);
    let mut out = (data.len() as u32).to_be_bytes().to_vec();
    out.extend_from_slice(&typed);
    out.extend_from_slice(&crc32(&typed).to_be_bytes());
    out
}

fn png_declaring(width: u32, height: u32) -> Vec<u8> {
    let mut ihdr = width.to_be_bytes().to_vec();
    ihdr.extend_from_slice(&height.to_be_bytes());
    ihdr.extend_from_slice(&[8, 0, 0, 0, 0]);
    let mut png = b"\x89PNG\r\n\x1a\n".to_vec();
    png.extend(png_chunk(b"IHDR", &ihdr));
    png.extend(png_chunk(b"IDAT", &[0x78, 0x9c, 0x03, 0x00, 0x00, 0x00, 0x00, 0x01]));
    png.extend(png_chunk(b"IEND", &[]));
    png
}

/// A little-endian baseline TIFF with one 8-bit grey strip of one byte whose
/// IFD declares `width x height` (TIFF 6.0 specification, section 2 and 8).
fn tiff_declaring(width: u32, height: u32) -> Vec<u8> {
    // (tag, type, count, value); type 3 = SHORT, 4 = LONG.
    let entries: [(u16, u16, u32, u32); 8] = [
        (256, 4, 1, width),
        (257, 4, 1, height),
        (258, 3, 1, 8),
        (259, 3, 1, 1),
        (262, 3, 1, 1),
        (273, 4, 1, 8 + 2 + 8 * 12 + 4),
        (278, 4, 1, height),
        (279, 4, 1, 1),
    ];
    let mut out = b"II*\0".to_vec();
    out.extend_from_slice(&8u32.to_le_bytes());
    out.extend_from_slice(&(entries.len() as u16).to_le_bytes());
    for (tag, kind, count, value) in entries {
        out.extend_from_slice(&tag.to_le_bytes());
        out.extend_from_slice(&kind.to_le_bytes());
        out.extend_from_slice(&count.to_le_bytes());
        if kind == 3 {
            out.extend_from_slice(&(value as u16).to_le_bytes());
            out.extend_from_slice(&[0, 0]);
        } else {
            out.extend_from_slice(&value.to_le_bytes());
        }
    }
    out.extend_from_slice(&0u32.to_le_bytes());
    out.push(0x80);
    out
}

const LIMIT_MESSAGE: &str = "header declares 100000 x 100000 pixels (height x width, 10000 Mpx), \
                             above the limit of 64 Mpx; raise the limit or crop the image";

#[test]
fn huge_png_header_is_refused_without_a_large_allocation() {
    let png = png_declaring(100_000, 100_000);
    let (result, largest) = largest_allocation(|| decode("huge.png", &png, &DecodeLimits::default()));
    assert_eq!(result.unwrap_err().to_string(), format!("huge.png: {LIMIT_MESSAGE}"));
    assert!(largest < 4 << 20, "largest allocation {largest} bytes");
}

#[test]
fn huge_tiff_header_is_refused_without_a_large_allocation() {
    let tiff = tiff_declaring(100_000, 100_000);
    let (result, largest) = largest_allocation(|| decode("huge.tif", &tiff, &DecodeLimits::default()));
    assert_eq!(result.unwrap_err().to_string(), format!("huge.tif: page 1: {LIMIT_MESSAGE}"));
    assert!(largest < 4 << 20, "largest allocation {largest} bytes");
}

#[test]
fn hand_made_tiff_within_the_limit_decodes() {
    // The same builder with a 1 x 1 size gives one pixel of value 0x80 / 255:
    // shows the oversized files above are refused for their size alone.
    let images = decode("one.tif", &tiff_declaring(1, 1), &DecodeLimits::default()).unwrap();
    assert_eq!(images.len(), 1);
    assert_eq!(images[0].1.pixels, vec![128.0 / 255.0]);
}

#[test]
fn limit_check_counts_pixels_not_bytes() {
    // 8000 x 8000 = 64 Mpx exactly is allowed by the header check (the
    // data is missing, so decoding then fails as truncated, not as too big);
    // 8001 x 8000 is refused by the header check.
    let at_limit = decode("edge.png", &png_declaring(8000, 8000), &DecodeLimits::default())
        .unwrap_err()
        .to_string();
    assert!(at_limit.starts_with("edge.png: truncated or corrupt PNG data"), "{at_limit}");
    let over = decode("over.png", &png_declaring(8001, 8000), &DecodeLimits::default())
        .unwrap_err()
        .to_string();
    assert!(over.contains("8000 x 8001 pixels") && over.contains("above the limit of 64 Mpx"), "{over}");
}
