//! The fit report: the numbers a user exports (`report.json`).
//!
//! Energies and errors are sums of squared pixel values over the stack, with
//! integer images scaled to [0, 1] (MATH.md §1); relative errors divide by the
//! stack's total energy.

use crate::settings::FitSettings;
use serde::{Deserialize, Serialize};

/// Peak signal-to-noise ratio of a whole stack in dB, with peak value 1.0
/// (intensities are scaled to [0, 1]): `10 log10(pixels · 1² / error)`,
/// where `pixels` counts all pixels of all images and `error` is the summed
/// squared error. Infinite for a zero error.
pub fn psnr_db(error: f64, pixels: usize) -> f64 {
    10.0 * (pixels as f64 / error).log10()
}

/// One point of the error curve: the optimal error with `generators` generators.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct CurvePoint {
    pub generators: usize,
    pub error: f64,
    pub relative_error: f64,
}

/// Error of one image: `||f_i - P_V f_i||²` at the largest generator count.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct ImageError {
    pub file: String,
    pub energy: f64,
    pub error: f64,
    pub relative_error: f64,
}

/// The band-limit terms of `E(F,S) = E(P_Ω F, S) + ||F − P_Ω F||²` at the
/// largest generator count.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct BandReport {
    /// Number of frequencies in the chosen set `Ω`.
    pub frequencies: usize,
    /// `||F − P_Ω F||²`: energy outside the band.
    pub outside_energy: f64,
    /// `E(P_Ω F, S)`: error of the band-limited stack.
    pub inside_error: f64,
}

/// Facts about one generator (MATH.md §5b: `||φ_l||² |Γ| = dim D_l`).
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct GeneratorInfo {
    pub index: usize,
    /// `||φ_l||²`.
    pub norm_squared: f64,
    /// Energy of the stack captured by this generator: `E(l−1) − E(l)`.
    pub captured_energy: f64,
    /// Share of the stack's total energy captured by this generator.
    pub captured_share: f64,
    /// `dim D_l`, the dimension of the generator's layer; 0 means it adds nothing.
    pub layer_dimension: usize,
    /// The norm of the imaginary part that the inverse transform of the
    /// generator's whole spectrum would leave, relative to the generator's
    /// norm (a realness check, an upper bound of the largest imaginary
    /// value; expect round-off, below 1e-9). Computed from the spectrum by
    /// Parseval: only half of it is transformed.
    pub imaginary_part: f64,
}

/// Everything a fit reports, in the format written to `report.json`.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Report {
    /// Always `"orbitspan-report"`.
    pub format: String,
    /// Format version, currently 1.
    pub version: u32,
    pub settings: FitSettings,
    pub height: usize,
    pub width: usize,
    /// `|G|`, the point group order.
    pub point_group_order: usize,
    /// `d`, pixels (or samples) in one primitive cell.
    pub cell_pixels: usize,
    /// `Σ_i ||f_i||²`.
    pub total_energy: f64,
    pub error_curve: Vec<CurvePoint>,
    pub images: Vec<ImageError>,
    pub band: Option<BandReport>,
    pub generators: Vec<GeneratorInfo>,
}

#[cfg(test)]
mod tests {
    use super::psnr_db;

    #[test]
    fn psnr_of_known_values() {
        // mean squared error 1e-4 with peak 1: 40 dB (the usual definition, common practice)
        assert!((psnr_db(0.01, 100) - 40.0).abs() < 1e-12);
        assert!((psnr_db(16384.0, 65536) - 10.0 * 4f64.log10()).abs() < 1e-12);
        assert_eq!(psnr_db(0.0, 10), f64::INFINITY);
    }
}
