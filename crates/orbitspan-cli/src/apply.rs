//! `orbitspan apply`: load a saved model, evaluate images against it, write
//! residuals and an apply report.

use crate::args::ApplyArgs;
use crate::export;
use crate::failure::{printed, CliError};
use crate::input::read_stack;
use crate::progress_bar::ProgressBar;
use crate::tables;
use orbitspan_core::model::Model;
use serde_json::json;
use std::io::Write;

pub fn run(args: &ApplyArgs, out: &mut dyn Write) -> Result<(), CliError> {
    let mut progress = ProgressBar::on_stderr();
    let bytes = std::fs::read(&args.model).map_err(|e| CliError::path(&args.model, format!("cannot read: {e}")))?;
    let model = Model::from_bytes(&args.model.display().to_string(), &bytes)?;
    let stack = read_stack(&args.input, &mut progress)?;
    let images = model.evaluate(&stack, &mut progress)?;
    progress.finish();

    printed(
        writeln!(
            out,
            "{} images of {} x {} pixels against the model {} ({}, {} generators)\n",
            stack.len(),
            stack.height(),
            stack.width(),
            args.model.display(),
            tables::describe_settings(model.settings()),
            model.generators().len()
        )
        .and_then(|()| tables::print_images(out, &images))
        .and_then(|()| out.flush()),
    )?;

    let total_energy: f64 = images.iter().map(|e| e.energy).sum();
    let total_error: f64 = images.iter().map(|e| e.error).sum();
    let report = json!({
        "format": "orbitspan-apply-report",
        "version": 1,
        "model": args.model.display().to_string(),
        "settings": model.settings(),
        "height": model.height(),
        "width": model.width(),
        "total_energy": total_energy,
        "total_error": total_error,
        "relative_error": if total_energy > 0.0 { total_error / total_energy } else { 0.0 },
        "images": images,
    });

    export::create_dir(&args.out)?;
    export::write_approximations(&args.out, &stack, &model, &mut progress)?;
    export::write_json(&args.out.join("report.json"), &report)?;
    progress.finish();
    if let Some(file) = &args.report {
        export::write_json(file, &report)?;
    }
    Ok(())
}
