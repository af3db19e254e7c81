//! Measured lattices for the page: the lattice of a [`LatticeChoice`]
//! (core `lattice_detect`), the groups it allows (core `survey::candidates`),
//! and what the page is told about a lattice and a fit on it. The choices
//! are those of `orbitspan fit --lattice` (crates/orbitspan-cli/src/measured.rs),
//! so the page and the command line fit the same grid.

use crate::page_settings::LatticeChoice;
use orbitspan_core::lattice_detect::{self, DetectOptions, Detection, LatticeKind, LatticeVectors};
use orbitspan_core::plane_group::{LatticeType, PlaneGroup};
use orbitspan_core::resample::{CellVectors, LatticeGrid};
use orbitspan_core::survey::{candidates, CellChoice, MeasuredFit};
use orbitspan_core::{Error, Result, Stack};
use serde::{Deserialize, Serialize};

/// A lattice to work on: the reduced basis, the conventional cell, the type,
/// and the detection when it was measured.
#[derive(Clone, Debug)]
pub struct Measured {
    pub reduced: LatticeVectors,
    pub conventional: LatticeVectors,
    pub kind: LatticeKind,
    pub detection: Option<Detection>,
}

impl Measured {
    /// The lattice of a detection (core [`lattice_detect::detect`]).
    pub fn detected(d: Detection) -> Measured {
        Measured { reduced: d.vectors, conventional: d.conventional, kind: d.kind, detection: Some(d) }
    }

    /// The lattice of two typed vectors: reduced, classified with the default
    /// tolerances, and its conventional cell. Vectors that span no lattice
    /// (zero, parallel, not finite) are a bad-input error.
    pub fn typed(a1: [f64; 2], a2: [f64; 2]) -> Result<Measured> {
        let given = LatticeVectors { a1, a2 };
        let finite = a1.iter().chain(&a2).all(|v| v.is_finite());
        if !finite || given.area() < 1e-9 * (1.0 + given.lengths()[0] * given.lengths()[1]) {
            return Err(Error::input(format!(
                "the lattice vectors a1 = ({}, {}) and a2 = ({}, {}) px span no lattice: give two non-parallel vectors of non-zero length",
                a1[0], a1[1], a2[0], a2[1]
            )));
        }
        let options = DetectOptions::default();
        let reduced = lattice_detect::reduce(&given);
        let kind = lattice_detect::classify(&reduced, &options);
        let conventional = lattice_detect::conventional_cell(&reduced, kind);
        Ok(Measured { reduced, conventional, kind, detection: None })
    }

    /// The lattice of `choice` on `stack`, measuring with `detect` when asked.
    pub fn of(choice: LatticeChoice, stack: &Stack, detect: impl FnOnce(&Stack) -> Result<Detection>) -> Result<Measured> {
        match choice {
            LatticeChoice::Detect => detect(stack).map(Measured::detected),
            LatticeChoice::Vectors { a1, a2 } => Measured::typed(a1, a2),
        }
    }

    pub fn lattice_type(&self) -> LatticeType {
        match self.kind {
            LatticeKind::Oblique => LatticeType::Oblique,
            LatticeKind::Rectangular => LatticeType::Rectangular,
            LatticeKind::CentredRectangular => LatticeType::Centred,
            LatticeKind::Square => LatticeType::Square,
            LatticeKind::Hexagonal => LatticeType::Hexagonal,
        }
    }

    /// The cell `group` is fitted on (reduced, or conventional for cm and
    /// cmm), or why the lattice does not allow the group.
    pub fn cell_for(&self, group: &PlaneGroup) -> std::result::Result<CellVectors, String> {
        let allowed = candidates(self.lattice_type());
        match allowed.iter().find(|(g, _)| g == group) {
            Some((_, CellChoice::Conventional)) => Ok([self.conventional.a1, self.conventional.a2]),
            Some((_, CellChoice::Reduced)) => Ok([self.reduced.a1, self.reduced.a2]),
            None => {
                let names: Vec<String> = allowed.iter().map(|(g, _)| g.name()).collect();
                Err(format!(
                    "{} needs a {} lattice; the lattice is {} (it allows {})",
                    group.name(),
                    type_name(group.symbol.lattice_type()),
                    self.kind,
                    names.join(", ")
                ))
            }
        }
    }

    /// What the page shows about the lattice.
    pub fn info(&self) -> LatticeInfo {
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

fn type_name(t: LatticeType) -> &'static str {
    match t {
        LatticeType::Oblique => "oblique",
        LatticeType::Rectangular => "rectangular",
        LatticeType::Centred => "centred rectangular",
        LatticeType::Square => "square",
        LatticeType::Hexagonal => "hexagonal",
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
