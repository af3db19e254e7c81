#![allow(dead_code)] // each test file uses a different part of this module
//! Shared pieces of the command-line tests: running the built binary and
//! fresh temporary folders.

use std::ffi::OsStr;
use std::path::{Path, PathBuf};
use std::process::Command;
use std::sync::atomic::{AtomicUsize, Ordering};

/// What one run of `orbitspan` produced.
pub struct Run {
    pub code: Option<i32>,
    pub stdout: String,
    pub stderr: String,
}

/// Runs the `orbitspan` binary built for these tests.
pub fn orbitspan<I, S>(args: I) -> Run
where
    I: IntoIterator<Item = S>,
    S: AsRef<OsStr>,
{
    let output = Command::new(env!("CARGO_BIN_EXE_orbitspan")).args(args).output().expect("run orbitspan");
    Run {
        code: output.status.code(),
        stdout: String::from_utf8_lossy(&output.stdout).into_owned(),
        stderr: String::from_utf8_lossy(&output.stderr).into_owned(),
    }
}

/// An empty folder under the system temporary folder, unique to this process
/// and call.
pub fn fresh_dir(name: &str) -> PathBuf {
    static COUNTER: AtomicUsize = AtomicUsize::new(0);
    let n = COUNTER.fetch_add(1, Ordering::SeqCst);
    let dir = std::env::temp_dir().join(format!("orbitspan-cli-test-{}-{n}-{name}", std::process::id()));
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&dir).expect("create temporary folder");
    dir
}

/// Writes an 8-bit grey PNG of `height x width` with a deterministic pattern.
pub fn write_png(path: &Path, height: u32, width: u32) {
    let image = image::GrayImage::from_fn(width, height, |c, r| image::Luma([((r * 7 + c * 13) % 251) as u8]));
    image.save(path).expect("write PNG");
}

/// `|a − b| ≤ rel · max(|a|, |b|)`.
pub fn close(a: f64, b: f64, rel: f64) -> bool {
    (a - b).abs() <= rel * a.abs().max(b.abs())
}
