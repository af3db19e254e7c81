//! The benchmark workloads of issue 5, invented from a fixed seed: a
//! cell-periodic random motif plus Gaussian noise, so every image has a real
//! lattice and a real error curve.

use orbitspan_core::plane_group::{GroupSymbol, PlaneGroup};
use orbitspan_core::prng::SplitMix64;
use orbitspan_core::stack::cut_tiles;
use orbitspan_core::{FitSettings, Image, Stack};

const SEED: u64 = 0x0b17_5ba2_be9c_0005;

pub struct Workload {
    pub name: &'static str,
    pub description: String,
    pub settings: FitSettings,
    /// `Some(side)`: one large image of `size` cut into `side x side` tiles.
    tiles: Option<usize>,
    count: usize,
    size: usize,
}

fn settings(symbol: GroupSymbol, cell: usize, generators: usize) -> FitSettings {
    FitSettings {
        group: PlaneGroup::standard(symbol),
        cell_rows: cell,
        cell_cols: cell,
        origin: [0, 0],
        generators,
        band: None,
        lattice_coords: false,
    }
}

/// A `size x size` image: a random motif repeated every `cell` pixels, plus
/// noise of standard deviation 0.5.
fn image(rng: &mut SplitMix64, size: usize, cell: usize, motif: &[f64]) -> Image {
    let shift = [(rng.next_u64() % cell as u64) as usize, (rng.next_u64() % cell as u64) as usize];
    let pixels = (0..size * size)
        .map(|x| {
            let (r, c) = ((x / size + shift[0]) % cell, (x % size + shift[1]) % cell);
            motif[r * cell + c] + 0.5 * rng.normal()
        })
        .collect();
    Image::new(size, size, pixels)
}

impl Workload {
    fn new(name: &'static str, symbol: GroupSymbol, count: usize, size: usize, cell: usize, generators: usize, tiles: Option<usize>) -> Workload {
        let description = match tiles {
            None => format!("{count} images {size}x{size}, {} cell {cell}x{cell}, L={generators}", symbol_name(symbol)),
            Some(t) => format!(
                "{size}x{size} image in {} tiles {t}x{t}, {} cell {cell}x{cell}, L={generators}",
                (size / t) * (size / t),
                symbol_name(symbol)
            ),
        };
        Workload { name, description, settings: settings(symbol, cell, generators), tiles, count, size }
    }

    /// The stack, the same on every call.
    pub fn stack(&self) -> Stack {
        let (images, tiles) = self.source_images();
        let items = match tiles {
            None => images.into_iter().enumerate().map(|(i, img)| (format!("image{i}"), img)).collect(),
            Some(t) => cut_tiles("large", &images[0], t, t).expect("the image size is a multiple of the tile size"),
        };
        Stack::new(items).expect("generated images are valid")
    }

    /// The images before tiling (one large image when tiled) and the tile side.
    pub fn source_images(&self) -> (Vec<Image>, Option<usize>) {
        let mut rng = SplitMix64(SEED ^ self.size as u64);
        let cell = self.settings.cell_rows;
        let motif: Vec<f64> = (0..cell * cell).map(|_| rng.between(-1.0, 1.0)).collect();
        let count = if self.tiles.is_some() { 1 } else { self.count };
        ((0..count).map(|_| image(&mut rng, self.size, cell, &motif)).collect(), self.tiles)
    }
}

fn symbol_name(symbol: GroupSymbol) -> String {
    PlaneGroup::standard(symbol).name()
}

/// W1, W2, W3 at full size, or smaller with `quick`.
pub fn workloads(quick: bool) -> Vec<Workload> {
    use GroupSymbol::*;
    if quick {
        vec![
            Workload::new("W1", P4m, 64, 64, 8, 8, None),
            Workload::new("W2", P4m, 4, 256, 32, 8, None),
            Workload::new("W3", Pmm, 1, 1024, 16, 12, Some(128)),
        ]
    } else {
        vec![
            Workload::new("W1", P4m, 256, 64, 8, 8, None),
            Workload::new("W2", P4m, 8, 1024, 32, 8, None),
            Workload::new("W3", Pmm, 1, 4096, 16, 12, Some(128)),
        ]
    }
}

/// Small tori where the dense method runs: p4m, 4x4 cell, 8 images, L = 3.
pub fn dense_cases() -> Vec<Workload> {
    [12, 24].iter().map(|&n| Workload::new("dense", GroupSymbol::P4m, 8, n, 4, 3, None)).collect()
}
