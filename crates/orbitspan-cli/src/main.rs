//! `orbitspan`: the native command line over `orbitspan-core`.
//!
//! Thin by design: parse the arguments, call the core, print tables and
//! write files. Exit codes: 0 success, 2 bad usage or bad input, 1 internal
//! error.

mod apply;
mod args;
mod demo;
mod export;
mod failure;
mod fit;
mod input;
mod measured;
mod progress_bar;
mod tables;

use args::Command;
use failure::CliError;
use std::io::Write;
use std::process::ExitCode;

fn main() -> ExitCode {
    // A panic is a bug in orbitspan: say so plainly and exit with code 1.
    std::panic::set_hook(Box::new(|info| {
        eprintln!("orbitspan: error: internal error (a bug, please report it): {info}");
    }));
    let outcome = std::panic::catch_unwind(|| run(std::env::args_os().skip(1).collect()));
    match outcome {
        Ok(Ok(())) => ExitCode::SUCCESS,
        Ok(Err(error)) => {
            let mut err = std::io::stderr().lock();
            let _ = writeln!(err, "orbitspan: error: {error}");
            if let Some(help) = error.help() {
                let _ = write!(err, "\n{help}");
            }
            ExitCode::from(error.exit_code())
        }
        Err(_) => ExitCode::from(1),
    }
}

fn run(arguments: Vec<std::ffi::OsString>) -> Result<(), CliError> {
    let stdout = std::io::stdout();
    let mut out = stdout.lock();
    match args::parse(arguments)? {
        Command::Fit(a) => fit::run(&a, &mut out),
        Command::Apply(a) => apply::run(&a, &mut out),
        Command::Demo(a) => demo::run(&a, &mut out),
        Command::Detect(a) => measured::detect(&a, &mut out),
        Command::Survey(a) => measured::survey(&a, &mut out),
        Command::Help(text) => failure::printed(write!(out, "{text}")),
        Command::Version => failure::printed(writeln!(out, "orbitspan {}", env!("CARGO_PKG_VERSION"))),
    }
}
