//! `cargo xtask bench [--quick] [--reps N] [--only W1,W2,W3]`: runs the
//! benchmark crate (`crates/orbitspan-bench`) in release, which prints the
//! table of ratios and writes `target/bench/bench.md` and `bench.json`.
//! The arguments are passed through. The wasm / native row is written as
//! "not measured" by the benchmark: it does not time the browser app.

use crate::{run_command, workspace_root, Result};
use std::process::Command;

pub fn run(args: &[String]) -> Result<()> {
    let mut command = Command::new(std::env::var("CARGO").unwrap_or_else(|_| "cargo".into()));
    command.current_dir(workspace_root()).args(["run", "--release", "-p", "orbitspan-bench", "--"]).args(args);
    run_command(&mut command)
}
