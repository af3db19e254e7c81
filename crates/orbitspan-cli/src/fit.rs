//! `orbitspan fit`: read the stack, fit, print the tables, write the files.

use crate::args::FitArgs;
use crate::export;
use crate::failure::{printed, CliError};
use crate::input::read_stack;
use crate::progress_bar::ProgressBar;
use crate::tables;
use orbitspan_core::fit::fit;
use orbitspan_core::model::MODEL_FILE_EXTENSION;
use std::io::Write;

pub fn run(args: &FitArgs, out: &mut dyn Write) -> Result<(), CliError> {
    let mut progress = ProgressBar::on_stderr();
    let stack = read_stack(&args.input, &mut progress)?;
    if let Some(lattice) = args.lattice {
        return crate::measured::fit(args, lattice, &stack, &mut progress, out);
    }
    let settings = args.settings(stack.height(), stack.width());
    let result = fit(&stack, &settings, &mut progress)?;
    progress.finish();
    printed(tables::print_fit(out, &result.report).and_then(|()| out.flush()))?;

    if let Some(dir) = &args.out {
        export::create_dir(dir)?;
        export::write_generators(dir, &result.model)?;
        export::write_approximations(dir, &stack, &result.model, &mut progress)?;
        export::write_model(&dir.join(format!("model.{MODEL_FILE_EXTENSION}")), &result.model)?;
        export::write_json(&dir.join("report.json"), &result.report)?;
        progress.finish();
    }
    if let Some(file) = &args.report {
        export::write_json(file, &result.report)?;
    }
    Ok(())
}
