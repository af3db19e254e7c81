//! The tables printed on stdout: the error curve and the per-image errors.

use orbitspan_core::report::{psnr_db, ImageError, Report};
use orbitspan_core::FitSettings;
use std::io::{self, Write};

/// The fit summary, the error curve and the per-image errors.
pub fn print_fit(out: &mut dyn Write, report: &Report) -> io::Result<()> {
    let pixels = report.images.len() * report.height * report.width;
    writeln!(
        out,
        "{} images of {} x {} pixels; {}; point group order {}, {} pixels per primitive cell",
        report.images.len(),
        report.height,
        report.width,
        describe_settings(&report.settings),
        report.point_group_order,
        report.cell_pixels
    )?;
    writeln!(out, "total energy (sum of squared pixels): {}", number(report.total_energy))?;
    if let Some(band) = &report.band {
        writeln!(
            out,
            "band limit: {} frequencies; energy outside the band {}, error inside the band {}",
            band.frequencies,
            number(band.outside_energy),
            number(band.inside_error)
        )?;
    }
    writeln!(out)?;
    writeln!(out, "error curve (PSNR over the whole stack, peak 1.0)")?;
    writeln!(
        out,
        "{:>10}  {:>14}  {:>16}  {:>10}  {:>18}",
        "generators", "error", "relative error", "PSNR (dB)", "energy captured"
    )?;
    for point in &report.error_curve {
        let captured = match report.generators.iter().find(|g| g.index == point.generators) {
            Some(g) if g.layer_dimension == 0 => "adds nothing".to_string(),
            Some(g) => percent(g.captured_share),
            None => "-".to_string(),
        };
        writeln!(
            out,
            "{:>10}  {:>14}  {:>14.6} %  {:>10}  {:>18}",
            point.generators,
            number(point.error),
            100.0 * point.relative_error,
            decibels(psnr_db(point.error, pixels)),
            captured
        )?;
    }
    writeln!(out)?;
    writeln!(out, "per-image errors with {} generators", report.settings.generators)?;
    print_images(out, &report.images)
}

/// The per-image table and its total.
pub fn print_images(out: &mut dyn Write, images: &[ImageError]) -> io::Result<()> {
    let width = images.iter().map(|e| e.file.chars().count()).max().unwrap_or(0).max(5);
    writeln!(out, "{:<width$}  {:>14}  {:>14}  {:>16}", "image", "energy", "error", "relative error")?;
    for e in images {
        writeln!(
            out,
            "{:<width$}  {:>14}  {:>14}  {:>14.6} %",
            e.file,
            number(e.energy),
            number(e.error),
            100.0 * e.relative_error
        )?;
    }
    let energy: f64 = images.iter().map(|e| e.energy).sum();
    let error: f64 = images.iter().map(|e| e.error).sum();
    let relative = if energy > 0.0 { 100.0 * error / energy } else { 0.0 };
    writeln!(out, "{:<width$}  {:>14}  {:>14}  {:>14.6} %", "total", number(energy), number(error), relative)
}

/// `p4m, cell 16 x 16, origin (0, 0), band ...`.
pub fn describe_settings(s: &FitSettings) -> String {
    let mut text = format!(
        "group {}, cell {} x {}, origin ({}, {})",
        s.group.name(),
        s.cell_rows,
        s.cell_cols,
        s.origin[0],
        s.origin[1]
    );
    if s.lattice_coords {
        text.push_str(", lattice coordinates");
    }
    text
}

/// A share as a percentage: four decimals, or scientific notation when tiny.
fn percent(share: f64) -> String {
    let p = 100.0 * share;
    if p == 0.0 || p.abs() >= 0.01 {
        format!("{p:.4} %")
    } else {
        format!("{p:.3e} %")
    }
}

/// Seven significant digits in scientific notation.
fn number(v: f64) -> String {
    format!("{v:.6e}")
}

fn decibels(v: f64) -> String {
    if v.is_infinite() && v > 0.0 {
        "inf".to_string()
    } else {
        format!("{v:.2}")
    }
}

#[cfg(test)]
mod tests {
    use super::*;


    #[test]
    fn tiny_shares_stay_visible() {
        assert_eq!(percent(0.5), "50.0000 %");
        assert_eq!(percent(2.5e-7), "2.500e-5 %");
        assert_eq!(percent(0.0), "0.0000 %");
    }

    #[test]
    fn image_table_has_a_total_row() {
        let images = vec![
            ImageError { file: "a.png".into(), energy: 2.0, error: 0.5, relative_error: 0.25 },
            ImageError { file: "bb.png".into(), energy: 6.0, error: 0.5, relative_error: 0.5 / 6.0 },
        ];
        let mut out = Vec::new();
        print_images(&mut out, &images).unwrap();
        let text = String::from_utf8(out).unwrap();
        let last = text.lines().last().unwrap();
        assert!(last.starts_with("total"), "{text}");
        assert!(last.contains("8.000000e0") && last.contains("1.000000e0") && last.contains("12.500000 %"), "{text}");
    }
}
