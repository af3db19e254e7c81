//! What the user chooses for a fit: group, cell, origin, generator count, band.

use crate::plane_group::PlaneGroup;
use serde::{Deserialize, Serialize};

/// How the frequency band is chosen (MATH.md §6).
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case", tag = "kind", content = "value")]
pub enum BandSpec {
    /// The symmetric frequency set of at most `M` frequencies that keeps the
    /// most energy of the stack (exact knapsack over frequency orbits).
    Frequencies(usize),
    /// All frequencies `ξ` with `|ξ| ≤ R`, where `|ξ|` is measured in cycles
    /// per image along each axis (`ξ1` wrapped to `(-n1/2, n1/2]`, likewise
    /// `ξ2`), taken whole orbits at a time.
    Radius(f64),
}

/// Settings of one fit. Cell sizes are in pixels (or lattice samples when
/// `lattice_coords` is set); `origin` is the pixel `(row, column)` placed at
/// the rotation centre / origin of the group's coordinates.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct FitSettings {
    pub group: PlaneGroup,
    pub cell_rows: usize,
    pub cell_cols: usize,
    pub origin: [usize; 2],
    /// Largest generator count `L`; the error curve covers `1..=L`.
    pub generators: usize,
    pub band: Option<BandSpec>,
    /// The images are already sampled in lattice coordinates (needed for the
    /// hexagonal groups).
    pub lattice_coords: bool,
}
