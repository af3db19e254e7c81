//! orbitspan-core: optimal Γ-invariant subspace models of image stacks.
//!
//! The mathematics is specified in `shared/design/MATH.md`; each module owns
//! one concept of it. No wasm, web or command-line code lives here.

pub mod error;
pub mod stack;

pub use error::{Error, Result};
pub use stack::{Image, Stack};
