//! orbitspan-wasm: the browser's thin facade over `orbitspan-core`.
//!
//! The page's worker (`web/worker.js`) holds one [`Session`]: the images of
//! the stack, the report of the last fit and the current model (from a fit or
//! from a file). Each method translates JavaScript values to a core call and
//! back; there is no mathematics here. Results that are small records (the
//! report, per-image errors, settings) cross as plain objects via
//! serde-wasm-bindgen; pictures and pixel values cross as typed arrays
//! (`Uint8ClampedArray` RGBA, `Float64Array`), file contents as `Uint8Array`.
//!
//! Errors are thrown as JavaScript `Error`s whose `name` is `BadInput`,
//! `Cancelled` or `InternalError` and whose message is the core's (naming the
//! file and the problem).

mod js_values;
mod measured_lattice;
mod page_settings;
mod session;

pub use measured_lattice::{LatticeFit, LatticeInfo};
pub use page_settings::{LatticeChoice, PageSettings};
pub use session::{residual_legend, FitTaskSolver, Session};
