//! Reading the image files named on the command line into one stack.

use crate::args::InputArgs;
use crate::failure::CliError;
use crate::progress_bar::ProgressBar;
use orbitspan_core::image_io::{read_path, DecodeLimits};
use orbitspan_core::stack::cut_tiles;
use orbitspan_core::{Progress, Stack};

/// Decodes every file (all pages of multi-page TIFFs), cuts tiles if asked,
/// and checks that the stack is one size and finite. Errors name the file.
pub fn read_stack(input: &InputArgs, progress: &mut ProgressBar) -> Result<Stack, CliError> {
    let limits = DecodeLimits { max_pixels: (input.max_megapixels * 1e6).round() as u64 };
    let mut items = Vec::new();
    for (i, path) in input.images.iter().enumerate() {
        progress.update("reading images", i as f64 / input.images.len() as f64);
        for (label, image) in read_path(path, &limits)? {
            match input.tile {
                Some([rows, cols]) => items.extend(cut_tiles(&label, &image, rows, cols)?),
                None => items.push((label, image)),
            }
        }
    }
    Ok(Stack::new(items)?)
}
