//! The workloads as image files, for timing the browser app on the same
//! data as the native fit (`cargo xtask bench` runs the browser side with
//! `tests/e2e/bench-browser.js`).
//!
//! `write` puts each workload under `DIR/<name>/`: 16-bit greyscale PNGs
//! (the values mapped linearly from `[-4, 4]`, clamped; the timing does not
//! depend on the exact levels) and `workload.json` with the page's settings
//! form and, for W3, the tile size the page cuts the one large image into.
//! `load` decodes them as the command line does, so native and wasm fit the
//! same stack. The browser script writes `DIR/browser.json`.

use crate::workload::Workload;
use orbitspan_core::image_io::{read_path, DecodeLimits};
use orbitspan_core::stack::cut_tiles;
use orbitspan_core::{Image, Stack};
use serde::{Deserialize, Serialize};
use std::path::Path;

/// `DIR/<name>/workload.json`.
#[derive(Serialize, Deserialize)]
pub struct Description {
    pub name: String,
    pub description: String,
    pub files: Vec<String>,
    /// `{ rows, cols }`: cut the file into tiles of this size.
    pub tile: Option<Tile>,
    /// The page's settings form (see web/worker.js).
    pub settings: serde_json::Value,
}

#[derive(Serialize, Deserialize, Clone, Copy)]
pub struct Tile {
    pub rows: usize,
    pub cols: usize,
}

/// One workload's in-browser times, from `DIR/browser.json`.
#[derive(Deserialize, Serialize, Clone)]
pub struct BrowserTiming {
    pub name: String,
    pub images: usize,
    /// Seconds of the fit request as the worker measures it (wasm).
    pub worker_seconds: Vec<f64>,
    /// Seconds from posting the request to its result, in the page.
    pub page_seconds: Vec<f64>,
    /// After each fit, seconds of the first image's pictures request.
    #[serde(default)]
    pub picture_seconds: Vec<f64>,
    /// Then seconds of the next image's pictures request (the model's
    /// spectra made by then).
    #[serde(default)]
    pub next_picture_seconds: Vec<f64>,
    /// After each fit, seconds of the model file request.
    #[serde(default)]
    pub model_file_seconds: Vec<f64>,
    /// The worker's wasm memory after the fits (it only grows: a peak).
    pub wasm_memory_bytes: usize,
    /// Workers of the spread fit (one per core; 1: not measured).
    #[serde(default)]
    pub workers: usize,
    /// Seconds of the spread fit as its worker measures it.
    #[serde(default)]
    pub spread_seconds: Vec<f64>,
    /// Per spread fit, its breakdown.
    #[serde(default)]
    pub spread_timing: Vec<SpreadTiming>,
    /// The spread fit's wasm memory, all its workers together.
    #[serde(default)]
    pub spread_memory_bytes: usize,
}

/// Where a spread fit's time goes (seconds): before the tasks (transforms,
/// band, cutting), after them (sums, the generator images not handed
/// out), the tasks' work summed over the workers, and the handing out:
/// the time the fitting worker spent making the tasks' bytes and taking in
/// their answers.
#[derive(Deserialize, Serialize, Clone, Copy)]
pub struct SpreadTiming {
    pub begin: f64,
    pub finish: f64,
    pub tasks: f64,
    #[serde(default)]
    pub handling: f64,
}

fn to_png16(img: &Image) -> image::ImageBuffer<image::Luma<u16>, Vec<u16>> {
    let levels = img.pixels.iter().map(|&v| (((v + 4.0) / 8.0).clamp(0.0, 1.0) * 65535.0).round() as u16).collect();
    image::ImageBuffer::from_raw(img.width as u32, img.height as u32, levels).expect("buffer matches the size")
}

/// Writes the workloads' files; returns the directories written.
pub fn write(dir: &Path, workloads: &[Workload]) -> Result<(), String> {
    for w in workloads {
        let sub = dir.join(w.name);
        std::fs::create_dir_all(&sub).map_err(|e| format!("{}: {e}", sub.display()))?;
        let (images, tile) = w.source_images();
        let mut files = Vec::new();
        for (i, img) in images.iter().enumerate() {
            let name = format!("{}-{:03}.png", w.name.to_lowercase(), i + 1);
            let path = sub.join(&name);
            to_png16(img).save(&path).map_err(|e| format!("{}: {e}", path.display()))?;
            files.push(name);
        }
        let s = &w.settings;
        let description = Description {
            name: w.name.into(),
            description: w.description.clone(),
            files,
            tile: tile.map(|t| Tile { rows: t, cols: t }),
            settings: serde_json::json!({
                "group": s.group.name(),
                "cell_rows": s.cell_rows,
                "cell_cols": s.cell_cols,
                "origin": [0, 0],
                "generators": s.generators,
                "band": null,
                "lattice_coords": false,
                "lattice": null,
                "samples": null,
            }),
        };
        let json = serde_json::to_string_pretty(&description).expect("description serialises");
        std::fs::write(sub.join("workload.json"), json).map_err(|e| format!("{}: {e}", sub.display()))?;
        eprintln!("wrote {} ({} files)", sub.display(), description.files.len());
    }
    Ok(())
}

/// The stack the page builds from the workload's files.
pub fn load(dir: &Path, name: &str) -> Result<Stack, String> {
    let sub = dir.join(name);
    let text = std::fs::read_to_string(sub.join("workload.json")).map_err(|e| format!("{}: {e}", sub.display()))?;
    let d: Description = serde_json::from_str(&text).map_err(|e| format!("{}: {e}", sub.display()))?;
    let mut items = Vec::new();
    for file in &d.files {
        for (label, img) in read_path(&sub.join(file), &DecodeLimits::default()).map_err(|e| e.to_string())? {
            match d.tile {
                None => items.push((label, img)),
                Some(t) => items.extend(cut_tiles(&label, &img, t.rows, t.cols).map_err(|e| e.to_string())?),
            }
        }
    }
    Stack::new(items).map_err(|e| e.to_string())
}

/// `DIR/browser.json`, if the browser side ran.
pub fn browser_timings(dir: &Path) -> Option<Vec<BrowserTiming>> {
    let text = std::fs::read_to_string(dir.join("browser.json")).ok()?;
    serde_json::from_str(&text).ok()
}
