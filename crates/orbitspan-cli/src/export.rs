//! Writing results into a folder: NumPy arrays, PNG pictures, the model and
//! JSON reports. File names are fixed so scripts can rely on them:
//! `generators.npy` (L, H, W), `approximations.npy` and `residuals.npy`
//! (N, H, W), all `f64`; `generator-01.png`, `fitted-001.png`,
//! `residual-001.png` (numbered from 1 in stack order).

use crate::failure::CliError;
use crate::progress_bar::ProgressBar;
use orbitspan_core::model::Model;
use orbitspan_core::{npy, picture, Image, Progress, Stack};
use std::path::Path;

/// Creates `dir` and its parents if needed.
pub fn create_dir(dir: &Path) -> Result<(), CliError> {
    std::fs::create_dir_all(dir).map_err(|e| CliError::path(dir, format!("cannot create folder: {e}")))
}

pub fn write_file(path: &Path, bytes: &[u8]) -> Result<(), CliError> {
    std::fs::write(path, bytes).map_err(|e| CliError::path(path, format!("cannot write: {e}")))
}

/// Pretty-printed JSON.
pub fn write_json(path: &Path, value: &impl serde::Serialize) -> Result<(), CliError> {
    let text = serde_json::to_string_pretty(value)
        .map_err(|e| CliError::path(path, format!("cannot encode JSON: {e}")))?;
    write_file(path, format!("{text}\n").as_bytes())
}

/// `generators.npy` and `generator-NN.png` (grey, percentile stretch).
pub fn write_generators(dir: &Path, model: &Model) -> Result<(), CliError> {
    let generators = model.generators();
    write_file(&dir.join("generators.npy"), &stack_npy(generators, model.height(), model.width()))?;
    for (l, g) in generators.iter().enumerate() {
        write_picture(&dir.join(format!("generator-{:02}.png", l + 1)), g, &picture::grey_rgba(g))?;
    }
    Ok(())
}

/// Projects every image onto the model space and writes
/// `approximations.npy`, `residuals.npy` (residual = image − fitted) and the
/// pictures `fitted-NNN.png` (grey) and `residual-NNN.png` (diverging map).
pub fn write_approximations(
    dir: &Path,
    stack: &Stack,
    model: &Model,
    progress: &mut ProgressBar,
) -> Result<(), CliError> {
    let (h, w) = (stack.height(), stack.width());
    let mut fitted_all = Vec::with_capacity(stack.len());
    let mut residual_all = Vec::with_capacity(stack.len());
    for (i, image) in stack.images().iter().enumerate() {
        progress.update("computing fitted images", i as f64 / stack.len() as f64);
        let fitted = model.project(image)?;
        let residual = Image::new(h, w, image.pixels.iter().zip(&fitted.pixels).map(|(f, p)| f - p).collect());
        fitted_all.push(fitted);
        residual_all.push(residual);
    }
    progress.stage("writing files");
    write_file(&dir.join("approximations.npy"), &stack_npy(&fitted_all, h, w))?;
    write_file(&dir.join("residuals.npy"), &stack_npy(&residual_all, h, w))?;
    for (i, (fitted, residual)) in fitted_all.iter().zip(&residual_all).enumerate() {
        progress.update("writing files", i as f64 / stack.len() as f64);
        write_picture(&dir.join(format!("fitted-{:03}.png", i + 1)), fitted, &picture::grey_rgba(fitted))?;
        write_picture(
            &dir.join(format!("residual-{:03}.png", i + 1)),
            residual,
            &picture::diverging_rgba(residual),
        )?;
    }
    Ok(())
}

/// The model in its own file format.
pub fn write_model(path: &Path, model: &Model) -> Result<(), CliError> {
    write_file(path, &model.to_bytes())
}

fn write_picture(path: &Path, image: &Image, rgba: &[u8]) -> Result<(), CliError> {
    write_file(path, &picture::png_rgba(image.height, image.width, rgba))
}

/// Images of `h x w` as one `f64` array of shape `(len, h, w)`.
fn stack_npy(images: &[Image], h: usize, w: usize) -> Vec<u8> {
    let data: Vec<f64> = images.iter().flat_map(|im| im.pixels.iter().copied()).collect();
    npy::encode_f64(&[images.len(), h, w], &data)
}

/// Encodes a grey image with values in [0, 1] as a 16-bit greyscale PNG
/// (`round(v · 65535)`); values outside [0, 1] are clipped. Returns the PNG
/// and the number of clipped pixels.
pub fn png16(image: &Image) -> Result<(Vec<u8>, usize), String> {
    let mut clipped = 0;
    let samples: Vec<u16> = image
        .pixels
        .iter()
        .map(|&v| {
            if !(0.0..=1.0).contains(&v) {
                clipped += 1;
            }
            (v.clamp(0.0, 1.0) * 65535.0).round() as u16
        })
        .collect();
    let buffer = image::ImageBuffer::<image::Luma<u16>, Vec<u16>>::from_raw(
        image.width as u32,
        image.height as u32,
        samples,
    )
    .ok_or("image too large for a PNG")?;
    let mut bytes = std::io::Cursor::new(Vec::new());
    buffer.write_to(&mut bytes, image::ImageFormat::Png).map_err(|e| format!("cannot encode PNG: {e}"))?;
    Ok((bytes.into_inner(), clipped))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn png16_round_trips_through_the_decoder() {
        let image = Image::new(2, 3, vec![0.0, 1.0, 0.5, 0.25, 1.5, -0.1]);
        let (bytes, clipped) = png16(&image).unwrap();
        assert_eq!(clipped, 2);
        let decoded = image::load_from_memory(&bytes).unwrap().into_luma16();
        assert_eq!((decoded.width(), decoded.height()), (3, 2));
        assert_eq!(decoded.into_raw(), vec![0, 65535, 32768, 16384, 65535, 0]);
    }
}
