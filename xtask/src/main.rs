//! The developer's one entry point for orbitspan.
//!
//! ```text
//! cargo xtask test               every test: Rust, wasm facade, browser end to end
//! cargo xtask serve [--port P]   build the browser app and serve web/ on 127.0.0.1
//! cargo xtask dist               write dist/site/ and the self-contained dist/orbitspan.html
//! cargo xtask bench [--quick]    benchmark the fit against the FFT floor, the dense method and the browser
//! ```
//!
//! Plain Rust over `cargo`, `wasm-bindgen`, `node` and Chromium; the browser
//! bundle is built by [`browser_bundle`], served by [`serve`], packed by
//! [`dist`] (with [`module_inliner`] for the one-file page).

mod bench;
mod browser_bundle;
mod dist;
mod module_inliner;
mod serve;
mod test;

use std::path::PathBuf;
use std::process::ExitCode;

/// Errors are plain sentences for the terminal.
pub type Result<T> = std::result::Result<T, String>;

const USAGE: &str = "\
usage: cargo xtask <command>

commands:
  test                 run every test: cargo test, the core built for wasm32,
                       the wasm facade tests (Node) and the browser end-to-end
                       tests (headless Chromium)
  serve [--port P]     build the browser app (release) and serve web/ on
                       http://127.0.0.1:P/ (default port 8000)
  dist                 write dist/site/ (for any static host) and
                       dist/orbitspan.html (one self-contained file)
  bench [--quick] [--reps N] [--only W1,W2,W3,dense] [--no-browser]
                       benchmark the fit (release) natively and in headless
                       Chromium; writes target/bench/
";

fn main() -> ExitCode {
    let args: Vec<String> = std::env::args().skip(1).collect();
    let rest = args.get(1..).unwrap_or(&[]);
    let result = match args.first().map(String::as_str) {
        Some("test") => test::run(rest),
        Some("serve") => serve::run(rest),
        Some("dist") => dist::run(rest),
        Some("bench") => bench::run(rest),
        Some("help" | "--help" | "-h") => {
            print!("{USAGE}");
            Ok(())
        }
        Some(other) => Err(format!("unknown command '{other}'\n\n{USAGE}")),
        None => Err(format!("no command given\n\n{USAGE}")),
    };
    match result {
        Ok(()) => ExitCode::SUCCESS,
        Err(message) => {
            eprintln!("xtask: {message}");
            ExitCode::FAILURE
        }
    }
}

/// The workspace root (the folder holding the root `Cargo.toml`).
pub fn workspace_root() -> PathBuf {
    let manifest = PathBuf::from(env!("CARGO_MANIFEST_DIR"));
    manifest.parent().expect("xtask sits one level below the workspace root").to_path_buf()
}

/// Cargo's target folder: `$CARGO_TARGET_DIR` or `<root>/target`.
pub fn target_dir() -> PathBuf {
    match std::env::var_os("CARGO_TARGET_DIR") {
        Some(dir) => PathBuf::from(dir),
        None => workspace_root().join("target"),
    }
}

/// Refuses arguments a command does not take.
pub fn no_arguments(command: &str, args: &[String]) -> Result<()> {
    match args.first() {
        None => Ok(()),
        Some(arg) => Err(format!("'{command}' takes no argument '{arg}'\n\n{USAGE}")),
    }
}

/// Runs a command to completion, echoing it; fails with the command line if it fails.
pub fn run_command(command: &mut std::process::Command) -> Result<()> {
    let shown = format!("{command:?}").replace('"', "");
    println!("xtask: $ {shown}");
    let status = command.status().map_err(|e| format!("could not start `{shown}`: {e}"))?;
    if status.success() {
        Ok(())
    } else {
        Err(format!("`{shown}` failed ({status})"))
    }
}
