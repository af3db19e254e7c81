//! orbitspan-core: optimal Γ-invariant subspace models of image stacks.
//!
//! The mathematics is specified in `shared/design/MATH.md`; each module owns
//! one concept of it. No wasm, web or command-line code lives here.

pub mod error;
pub mod prng;
pub mod progress;
pub mod settings;
pub mod stack;
pub mod plane_group;
pub mod report;
pub mod lattice;
pub mod spectrum;
pub mod isotypic;
pub(crate) mod eigen;
pub(crate) mod matmul;
pub mod fiber;
pub mod band;
pub mod fit;
pub mod frame;
pub mod tasks;
pub(crate) mod pair_fibers;
pub mod model;
pub mod lattice_detect;
pub mod resample;
pub mod survey;
// Input and output.
pub mod image_io;
pub mod npy;
pub mod picture;
pub mod demo;

pub use error::{Error, Result};
pub use progress::{Progress, Silent};
pub use settings::{BandSpec, FitSettings};
pub use fit::{fit, Fit};
pub use model::Model;
pub use plane_group::PlaneGroup;
pub use stack::{Image, Stack};
pub use num_complex::Complex64;
