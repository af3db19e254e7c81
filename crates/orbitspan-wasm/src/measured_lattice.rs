//! Measured lattices for the page: the lattice of a [`LatticeChoice`]
//! (core `lattice_detect`), the groups it allows (core `survey::candidates`),
//! and what the page is told about a lattice and a fit on it. The choices
//! are those of `orbitspan fit --lattice` (crates/orbitspan-cli/src/measured.rs),
//! so the page and the command line fit the same grid.

use crate::page_settings::LatticeChoice;
use orbitspan_core::lattice_detect::Detection;
use orbitspan_core::resample::LatticeGrid;
use orbitspan_core::survey::{MeasuredFit, MeasuredLattice};
use orbitspan_core::{Result, Stack};
use serde::{Deserialize, Serialize};

/// The lattice the page works on: the core's [`MeasuredLattice`].
pub type Measured = MeasuredLattice;

/// The lattice of `choice` on `stack`, measuring with `detect` when asked.
pub fn measured_of(choice: LatticeChoice, stack: &Stack, detect: impl FnOnce(&Stack) -> Result<Detection>) -> Result<Measured> {
    match choice {
        LatticeChoice::Detect => detect(stack).map(Measured::detected),
        LatticeChoice::Vectors { a1, a2 } => Measured::typed(a1, a2),
    }
}

/// What the page is told about a lattice.
pub trait LatticeReport {
    /// What the page shows about the lattice.
    fn info(&self) -> LatticeInfo;
}

impl LatticeReport for Measured {
    fn info(&self) -> LatticeInfo {
        LatticeInfo {
            kind: self.kind.name().to_string(),
            a1: self.reduced.a1,
            a2: self.reduced.a2,
            lengths: self.reduced.lengths(),
            angle: self.reduced.angle_deg(),
            conventional: [self.conventional.a1, self.conventional.a2],
            uncertainty: self.detection.as_ref().map(|d| Uncertainty { lengths: d.uncertainty, angle: d.angle_uncertainty_deg }),
            peaks: self.detection.as_ref().map(|d| d.peaks_used),
        }
    }
}


/// `{ kind, a1, a2, lengths, angle, conventional, uncertainty, peaks }`:
/// the reduced basis in pixels (`(row, column)`), its lengths in pixels and
/// angle in degrees, the conventional cell, and for a detection the
/// 1-sigma uncertainties and the number of spectral peaks used (else `null`).
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct LatticeInfo {
    pub kind: String,
    pub a1: [f64; 2],
    pub a2: [f64; 2],
    pub lengths: [f64; 2],
    pub angle: f64,
    pub conventional: [[f64; 2]; 2],
    pub uncertainty: Option<Uncertainty>,
    pub peaks: Option<usize>,
}

/// One standard deviation of the two lengths (pixels) and of the angle (degrees).
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct Uncertainty {
    pub lengths: [f64; 2],
    pub angle: f64,
}

/// What a fit on a measured lattice leaves for pictures, applying and export:
/// the lattice, the grid the model lives on (sample `(i, j)` at pixel
/// `origin + (i/s1) A1 + (j/s2) A2`), the resampling error and the deviations
/// from the group's symmetry.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct LatticeFit {
    pub lattice: LatticeInfo,
    pub grid: LatticeGrid,
    pub resampling_error: f64,
    pub image_deviation: f64,
    pub cell_deviation: f64,
    pub noise_level: f64,
}

impl LatticeFit {
    pub fn new(measured: &Measured, fit: &MeasuredFit) -> LatticeFit {
        LatticeFit {
            lattice: measured.info(),
            grid: fit.grid.clone(),
            resampling_error: fit.resampling_error,
            image_deviation: fit.deviations.image,
            cell_deviation: fit.deviations.cell,
            noise_level: fit.deviations.noise,
        }
    }

    /// `lattice.json` as the command line writes it beside a measured fit.
    pub fn lattice_json(&self) -> serde_json::Value {
        serde_json::json!({
            "coordinates": "generators.npy, approximations.npy, residuals.npy and the fitted/residual/generator PNGs are on the lattice grid: sample (i, j) sits at pixel origin + (i / s1) A1 + (j / s2) A2; residual-pixels-NNN.png are mapped back to the pixel grid",
            "kind": self.lattice.kind.replace(' ', "_"),
            "reduced": { "a1": self.lattice.a1, "a2": self.lattice.a2 },
            "grid": self.grid,
            "resampling_error": self.resampling_error,
            "image_deviation": self.image_deviation,
            "cell_deviation": self.cell_deviation,
            "noise_level": self.noise_level,
        })
    }
}
