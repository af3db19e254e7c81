//! Builds the browser bundle: the `orbitspan-wasm` crate compiled for
//! `wasm32-unknown-unknown` in release, then `wasm-bindgen --target web` into
//! `web/pkg/` (gitignored).
//!
//! The `wasm-bindgen` command-line tool must be exactly the version of the
//! `wasm-bindgen` crate in `Cargo.lock`; [`ensure_tools`] installs it with
//! `cargo install wasm-bindgen-cli --version =X --locked` when the one on the
//! PATH (or in `$CARGO_HOME/bin`) differs.

use crate::{run_command, target_dir, workspace_root, Result};
use std::path::{Path, PathBuf};
use std::process::Command;

/// The facade crate and the file stem wasm-bindgen writes (`orbitspan_wasm.js`, `orbitspan_wasm_bg.wasm`).
pub const FACADE_CRATE: &str = "orbitspan-wasm";
pub const FACADE_STEM: &str = "orbitspan_wasm";
pub const WASM_TARGET: &str = "wasm32-unknown-unknown";

/// The wasm-bindgen tools at the pinned version.
pub struct Tools {
    pub bindgen: PathBuf,
    pub test_runner: PathBuf,
}

/// The `wasm-bindgen` crate version recorded in `Cargo.lock`.
pub fn locked_bindgen_version(root: &Path) -> Result<String> {
    let lock_path = root.join("Cargo.lock");
    let lock = std::fs::read_to_string(&lock_path)
        .map_err(|e| format!("{}: cannot read: {e}", lock_path.display()))?;
    let mut lines = lock.lines();
    while let Some(line) = lines.next() {
        if line.trim() == "name = \"wasm-bindgen\"" {
            if let Some(version) = lines
                .next()
                .and_then(|l| l.trim().strip_prefix("version = \""))
                .and_then(|v| v.strip_suffix('"'))
            {
                return Ok(version.to_string());
            }
        }
    }
    Err(format!("{}: no wasm-bindgen package; is crates/{FACADE_CRATE} a workspace member?", lock_path.display()))
}

/// Where `cargo install` puts binaries: `$CARGO_HOME/bin` (default `~/.cargo/bin`).
fn cargo_bin_dir() -> Option<PathBuf> {
    if let Some(home) = std::env::var_os("CARGO_HOME") {
        return Some(PathBuf::from(home).join("bin"));
    }
    std::env::var_os("HOME").map(|h| PathBuf::from(h).join(".cargo").join("bin"))
}

/// The version a `wasm-bindgen`-family binary reports (`wasm-bindgen 0.2.129` -> `0.2.129`).
fn reported_version(binary: &Path) -> Option<String> {
    let out = Command::new(binary).arg("--version").output().ok()?;
    let text = String::from_utf8_lossy(&out.stdout);
    text.split_whitespace().nth(1).map(str::to_string)
}

/// Finds `name` at `version` on the PATH or in the cargo bin folder.
fn find_tool(name: &str, version: &str) -> Option<PathBuf> {
    let mut candidates: Vec<PathBuf> = std::env::var_os("PATH")
        .map(|p| std::env::split_paths(&p).map(|d| d.join(name)).collect())
        .unwrap_or_default();
    if let Some(bin) = cargo_bin_dir() {
        candidates.push(bin.join(name));
    }
    candidates
        .into_iter()
        .filter(|c| c.is_file())
        .find(|c| reported_version(c).as_deref() == Some(version))
}

/// Returns the wasm-bindgen tools at the locked version, installing them if needed.
pub fn ensure_tools() -> Result<Tools> {
    let version = locked_bindgen_version(&workspace_root())?;
    let found = || Some(Tools {
        bindgen: find_tool("wasm-bindgen", &version)?,
        test_runner: find_tool("wasm-bindgen-test-runner", &version)?,
    });
    if let Some(tools) = found() {
        return Ok(tools);
    }
    println!("xtask: installing wasm-bindgen-cli {version} (matches Cargo.lock; takes a few minutes, once)");
    run_command(Command::new("cargo").args([
        "install",
        "wasm-bindgen-cli",
        "--version",
        &format!("={version}"),
        "--locked",
    ]))?;
    found().ok_or_else(|| {
        format!("wasm-bindgen {version} was installed but is not on the PATH or in $CARGO_HOME/bin")
    })
}

/// Builds the facade in release and writes the JS glue and `.wasm` into `out_dir`.
pub fn build(out_dir: &Path) -> Result<()> {
    let tools = ensure_tools()?;
    let root = workspace_root();
    run_command(
        Command::new("cargo")
            .current_dir(&root)
            .args(["build", "--release", "-p", FACADE_CRATE, "--target", WASM_TARGET]),
    )?;
    let wasm = target_dir().join(WASM_TARGET).join("release").join(format!("{FACADE_STEM}.wasm"));
    run_command(
        Command::new(&tools.bindgen)
            .arg("--target")
            .arg("web")
            .arg("--no-typescript")
            .arg("--out-dir")
            .arg(out_dir)
            .arg(&wasm),
    )
}

/// `web/pkg`, where the served page loads the bundle from.
pub fn web_pkg_dir() -> PathBuf {
    workspace_root().join("web").join("pkg")
}
