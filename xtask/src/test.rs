//! `cargo xtask test`: every test of the project, in four stages.
//!
//! 1. `cargo test --workspace` (core, command line, xtask);
//! 2. the core builds for `wasm32-unknown-unknown`;
//! 3. the wasm facade's wasm-bindgen tests, run in Node by `wasm-bindgen-test-runner`;
//! 4. the browser end-to-end tests (`node --test tests/e2e/*.test.js`, playwright-core
//!    driving `/usr/bin/chromium`) against `web/` served by [`crate::serve::Server`]
//!    and against the self-contained `dist/orbitspan.html`.
//!
//! Every stage runs even if an earlier one failed; the last line is
//! `xtask: N passed, M failed` (counting stages) and the exit code is non-zero
//! if any stage failed.

use crate::browser_bundle::{self, FACADE_CRATE, WASM_TARGET};
use crate::serve::Server;
use crate::{dist, no_arguments, run_command, target_dir, workspace_root, Result};
use std::path::Path;
use std::process::Command;
use std::time::Instant;

type Stage = (&'static str, fn(&Path) -> Result<()>);

const STAGES: [Stage; 4] = [
    ("cargo test (core, command line, xtask)", rust_tests),
    ("core builds for wasm32-unknown-unknown", core_for_wasm),
    ("wasm facade tests (wasm-bindgen-test in Node)", facade_tests),
    ("browser end-to-end tests (headless Chromium)", browser_tests),
];

pub fn run(args: &[String]) -> Result<()> {
    no_arguments("test", args)?;
    let root = workspace_root();
    let mut outcomes = Vec::new();
    for (i, (name, stage)) in STAGES.iter().enumerate() {
        println!("xtask: stage {}/{}: {name}", i + 1, STAGES.len());
        let start = Instant::now();
        let outcome = stage(&root);
        let seconds = start.elapsed().as_secs_f64();
        match &outcome {
            Ok(()) => println!("xtask: stage {}/{} passed in {seconds:.0} s: {name}", i + 1, STAGES.len()),
            Err(e) => println!("xtask: stage {}/{} FAILED in {seconds:.0} s: {name}: {e}", i + 1, STAGES.len()),
        }
        outcomes.push((name, outcome.is_ok()));
    }
    let failed = outcomes.iter().filter(|(_, ok)| !ok).count();
    for (name, ok) in &outcomes {
        println!("xtask: {} {name}", if *ok { "ok    " } else { "FAILED" });
    }
    println!("xtask: {} passed, {failed} failed", outcomes.len() - failed);
    if failed == 0 {
        Ok(())
    } else {
        Err(format!("{failed} of {} stages failed", outcomes.len()))
    }
}

fn rust_tests(root: &Path) -> Result<()> {
    // The facade's wasm-bindgen tests need a wasm runtime (stage 3); its
    // plain unit tests run natively here.
    run_command(Command::new("cargo").current_dir(root).args(["test", "--workspace", "--exclude", FACADE_CRATE]))?;
    run_command(Command::new("cargo").current_dir(root).args(["test", "-p", FACADE_CRATE, "--lib"]))
}

fn core_for_wasm(root: &Path) -> Result<()> {
    run_command(Command::new("cargo").current_dir(root).args(["build", "-p", "orbitspan-core", "--target", WASM_TARGET]))
}

fn facade_tests(root: &Path) -> Result<()> {
    let tools = browser_bundle::ensure_tools()?;
    run_command(
        Command::new("cargo")
            .current_dir(root)
            .env("CARGO_TARGET_WASM32_UNKNOWN_UNKNOWN_RUNNER", &tools.test_runner)
            .args(["test", "-p", FACADE_CRATE, "--target", WASM_TARGET]),
    )
}

fn browser_tests(root: &Path) -> Result<()> {
    let e2e = root.join("tests").join("e2e");
    if !e2e.join("node_modules").join("playwright-core").is_dir() {
        run_command(Command::new("npm").current_dir(&e2e).args(["ci", "--no-audit", "--no-fund"]))?;
    }
    let web = root.join("web");
    browser_bundle::build(&browser_bundle::web_pkg_dir())?;
    let single_file = root.join(dist::SINGLE_FILE);
    dist::write_single_file(&web, &single_file)?;
    // The command line the tests compare against (same optimisation as `cargo test`).
    run_command(Command::new("cargo").current_dir(root).args(["build", "--profile", "test", "-p", "orbitspan-cli"]))?;
    let cli = target_dir().join("debug").join("orbitspan");

    let server = Server::bind(&web, 0)?;
    let url = server.url();
    std::thread::spawn(move || server.serve_forever());

    let mut tests: Vec<String> = std::fs::read_dir(&e2e)
        .map_err(|e| format!("{}: {e}", e2e.display()))?
        .filter_map(|entry| entry.ok()?.file_name().into_string().ok())
        .filter(|name| name.ends_with(".test.js"))
        .collect();
    tests.sort();
    if tests.is_empty() {
        return Err(format!("no *.test.js files in {}", e2e.display()));
    }
    run_command(
        Command::new("node")
            .current_dir(&e2e)
            .env("ORBITSPAN_URL", &url)
            .env("ORBITSPAN_CLI", &cli)
            .env("ORBITSPAN_SINGLE_FILE", &single_file)
            .args(["--test", "--test-concurrency=1"])
            .args(&tests),
    )
}
