//! `cargo xtask bench [--quick] [--reps N] [--only W1,W2,W3,dense] [--no-browser]`:
//! the benchmark crate (`crates/orbitspan-bench`, release) against the FFT
//! floor and the dense method, and the same workloads in the browser app.
//!
//! Steps: build the browser app (release wasm); write the workloads as image
//! files under `target/bench/files/`; time them in headless Chromium through
//! the app's worker (`tests/e2e/bench-browser.js`, which writes
//! `browser.json`); then run the benchmark, which also times the native fit
//! of the same files and prints every ratio. Writes `target/bench/bench.md`
//! and `bench.json`. Without Chromium or the npm packages (or with
//! `--no-browser`) the browser step is skipped and the table says so; such
//! a run, like one with `--only` or `--quick`, writes `bench-partial.md`
//! and `bench-partial.json` instead, so that the whole table is not
//! overwritten by part of it.

use crate::serve::Server;
use crate::{browser_bundle, run_command, workspace_root, Result};
use std::path::Path;
use std::process::Command;

pub fn run(args: &[String]) -> Result<()> {
    let root = workspace_root();
    let no_browser = args.iter().any(|a| a == "--no-browser");
    let passed: Vec<String> = args.iter().filter(|a| *a != "--no-browser").cloned().collect();
    let selection: Vec<String> = selection_args(&passed);
    let files = root.join("target").join("bench").join("files");
    let mut bench_args = passed.clone();
    match browser_ready(&root) {
        Err(why) if !no_browser => println!("xtask: browser timing skipped: {why}"),
        Ok(()) if !no_browser => {
            browser_bundle::build(&browser_bundle::web_pkg_dir())?;
            let _ = std::fs::remove_dir_all(&files);
            run_command(bench_command(&root).args(&selection).arg("--write-files").arg(&files))?;
            let server = Server::bind(&root.join("web"), 0)?;
            let url = server.url();
            std::thread::spawn(move || server.serve_forever());
            let reps = reps_arg(&passed);
            run_command(
                Command::new("node")
                    .current_dir(root.join("tests").join("e2e"))
                    .env("ORBITSPAN_URL", &url)
                    .arg("bench-browser.js")
                    .arg(&files)
                    .args(["--reps", &reps]),
            )?;
            bench_args.push("--browser".into());
            bench_args.push(files.display().to_string());
        }
        _ => {}
    }
    run_command(bench_command(&root).args(&bench_args))
}

fn bench_command(root: &Path) -> Command {
    let mut command = Command::new(std::env::var("CARGO").unwrap_or_else(|_| "cargo".into()));
    command.current_dir(root).args(["run", "--release", "-p", "orbitspan-bench", "--"]);
    command
}

/// `--quick` and `--only X` from the arguments (they choose the workloads).
fn selection_args(args: &[String]) -> Vec<String> {
    let mut out = Vec::new();
    let mut it = args.iter();
    while let Some(a) = it.next() {
        if a == "--quick" {
            out.push(a.clone());
        } else if a == "--only" {
            out.push(a.clone());
            if let Some(v) = it.next() {
                out.push(v.clone());
            }
        }
    }
    out
}

/// The `--reps` value, or the benchmark's default.
fn reps_arg(args: &[String]) -> String {
    args.iter().position(|a| a == "--reps").and_then(|i| args.get(i + 1)).cloned().unwrap_or_else(|| "3".into())
}

/// Chromium and the end-to-end npm packages are there.
fn browser_ready(root: &Path) -> std::result::Result<(), String> {
    if !Path::new("/usr/bin/chromium").exists() {
        return Err("no /usr/bin/chromium (apt-get install chromium)".into());
    }
    if !root.join("tests/e2e/node_modules/playwright-core").is_dir() {
        return Err("no tests/e2e/node_modules (npm ci in tests/e2e)".into());
    }
    Ok(())
}
