//! Measured lattices on the command line: `detect`, `survey`, and
//! `fit --lattice` (resample onto the lattice, find the centre, fit).

use crate::args::{DetectArgs, FitArgs, LatticeArg, SurveyArgs};
use crate::export;
use crate::failure::{printed, CliError};
use crate::input::read_stack;
use crate::progress_bar::ProgressBar;
use crate::tables;
use orbitspan_core::lattice_detect::{self, DetectOptions};
use orbitspan_core::model::MODEL_FILE_EXTENSION;
use orbitspan_core::resample::CellVectors;
use orbitspan_core::survey::{self, CellChoice, MeasuredLattice};
use orbitspan_core::{picture, Image, Progress, Stack};
use std::io::Write;

fn measure(lattice: LatticeArg, stack: &Stack) -> Result<MeasuredLattice, CliError> {
    Ok(match lattice {
        LatticeArg::Detect => MeasuredLattice::detected(lattice_detect::detect(stack, &DetectOptions::default())?),
        LatticeArg::Vectors([a1, a2]) => MeasuredLattice::typed(a1, a2)?,
    })
}

fn cell(v: &orbitspan_core::lattice_detect::LatticeVectors) -> CellVectors {
    [v.a1, v.a2]
}

fn describe(m: &MeasuredLattice) -> String {
    let [l1, l2] = m.reduced.lengths();
    let mut text = format!(
        "lattice: {} ; a1 = ({:.4}, {:.4}) px, a2 = ({:.4}, {:.4}) px ; lengths {:.4}, {:.4} px ; angle {:.3} degrees",
        m.kind, m.reduced.a1[0], m.reduced.a1[1], m.reduced.a2[0], m.reduced.a2[1], l1, l2, m.reduced.angle_deg()
    );
    if let Some(d) = &m.detection {
        text.push_str(&format!(
            "\n  measured from {} spectral peaks; 1-sigma lengths {:.4}, {:.4} px, angle {:.4} degrees",
            d.peaks_used, d.uncertainty[0], d.uncertainty[1], d.angle_uncertainty_deg
        ));
    }
    text
}

/// `orbitspan detect`.
pub fn detect(args: &DetectArgs, out: &mut dyn Write) -> Result<(), CliError> {
    let mut progress = ProgressBar::on_stderr();
    let stack = read_stack(&args.input, &mut progress)?;
    progress.finish();
    let m = measure(LatticeArg::Detect, &stack)?;
    printed(writeln!(out, "{}", describe(&m)))?;
    if let Some(file) = &args.report {
        export::write_json(file, m.detection.as_ref().expect("detected"))?;
    }
    Ok(())
}

/// `orbitspan survey`.
pub fn survey(args: &SurveyArgs, out: &mut dyn Write) -> Result<(), CliError> {
    let mut progress = ProgressBar::on_stderr();
    let stack = read_stack(&args.input, &mut progress)?;
    let m = measure(args.lattice, &stack)?;
    let rows = survey::survey(
        &stack,
        m.kind.lattice_type(),
        cell(&m.reduced),
        cell(&m.conventional),
        args.samples,
        args.generators,
        &mut progress,
    )?;
    progress.finish();
    let mut text = format!("{}\n\n", describe(&m));
    text.push_str(&format!(
        "{:<8} {:>10} {:>15} {:>13} {:>11} {:>15} {:>22}\n",
        "group", "|G|", "cell deviation", "noise level", "consistent", "image deviation", "relative error"
    ));
    for r in &rows {
        text.push_str(&format!(
            "{:<8} {:>10} {:>14.3}% {:>12.3}% {:>11} {:>14.3}% {:>21.4}%   centre ({:.2}, {:.2}){}\n",
            r.group,
            r.order,
            100.0 * r.cell_deviation,
            100.0 * r.noise_level,
            if r.consistent { "yes" } else { "no" },
            100.0 * r.deviation,
            100.0 * r.relative_error,
            r.centre[0],
            r.centre[1],
            if r.cell == CellChoice::Conventional { "  (conventional cell)" } else { "" }
        ));
    }
    text.push_str(&format!(
        "\nCell deviation: relative distance between the stack's mean unit cell and its average over\n\
         the group, at the best symmetry centre (image deviation: the same for whole images, mean\n\
         removed, where noise counts too). Consistent: cell deviation within max(3 x noise level, 3%).\n\
         Rows are ranked consistent first, larger groups first; relative error with {} generator(s).\n\
         The first row is a suggestion, not a proof.\n",
        args.generators
    ));
    printed(write!(out, "{text}"))?;
    if let Some(file) = &args.report {
        export::write_json(file, &serde_json::json!({ "lattice": { "kind": m.kind, "a1": m.reduced.a1, "a2": m.reduced.a2 }, "generators": args.generators, "groups": rows }))?;
    }
    Ok(())
}

/// `orbitspan fit --lattice ...`.
pub fn fit(args: &FitArgs, lattice: LatticeArg, stack: &Stack, progress: &mut ProgressBar, out: &mut dyn Write) -> Result<(), CliError> {
    let m = measure(lattice, stack)?;
    let cell_vectors = m.cell_for(&args.group)?;
    let measured =
        survey::fit_measured(stack, cell_vectors, args.group, args.samples, args.generators, args.band, None, progress)?;
    progress.finish();
    let g = &measured.grid;
    let header = format!(
        "{}\ngrid: {} x {} cells of {} x {} samples, origin (symmetry centre) at pixel ({:.3}, {:.3}); \
         resampling error {:.3}% ; deviation from {}: mean cell {:.3}% (noise level {:.3}%), images {:.3}%\n",
        describe(&m),
        g.cells[0],
        g.cells[1],
        g.samples[0],
        g.samples[1],
        g.origin[0],
        g.origin[1],
        100.0 * measured.resampling_error,
        args.group.name(),
        100.0 * measured.deviations.cell,
        100.0 * measured.deviations.noise,
        100.0 * measured.deviations.image
    );
    printed(write!(out, "{header}").and_then(|()| tables::print_fit(out, &measured.fit.report)).and_then(|()| out.flush()))?;
    if let Some(dir) = &args.out {
        export::create_dir(dir)?;
        export::write_generators(dir, &measured.fit.model)?;
        export::write_approximations(dir, &measured.grid_stack, &measured.fit.model, progress)?;
        export::write_model(&dir.join(format!("model.{MODEL_FILE_EXTENSION}")), &measured.fit.model)?;
        export::write_json(&dir.join("report.json"), &measured.fit.report)?;
        export::write_json(
            &dir.join("lattice.json"),
            &serde_json::json!({
                "coordinates": "generators.npy, approximations.npy, residuals.npy and the fitted/residual/generator PNGs are on the lattice grid: sample (i, j) sits at pixel origin + (i / s1) A1 + (j / s2) A2; residual-pixels-NNN.png are mapped back to the pixel grid",
                "kind": m.kind,
                "reduced": { "a1": m.reduced.a1, "a2": m.reduced.a2 },
                "grid": measured.grid,
                "resampling_error": measured.resampling_error,
                "image_deviation": measured.deviations.image,
                "cell_deviation": measured.deviations.cell,
                "noise_level": measured.deviations.noise,
            }),
        )?;
        // residual maps in pixel geometry (zero outside the resampled area)
        for (i, (img, grid_img)) in stack.images().iter().zip(measured.grid_stack.images()).enumerate() {
            progress.update("mapping residuals to pixels", i as f64 / stack.len() as f64);
            let fitted = measured.fit.model.project(grid_img)?;
            let residual = Image::new(
                grid_img.height,
                grid_img.width,
                grid_img.pixels.iter().zip(&fitted.pixels).map(|(a, b)| a - b).collect(),
            );
            let (back, mask) = g.to_pixels(&residual, img.height, img.width);
            let masked = Image::new(back.height, back.width, back.pixels.iter().zip(&mask).map(|(v, &k)| if k { *v } else { 0.0 }).collect());
            export::write_file(
                &dir.join(format!("residual-pixels-{:03}.png", i + 1)),
                &picture::png_rgba(masked.height, masked.width, &picture::diverging_rgba(&masked)),
            )?;
        }
        progress.finish();
    }
    if let Some(file) = &args.report {
        export::write_json(file, &measured.fit.report)?;
    }
    Ok(())
}
