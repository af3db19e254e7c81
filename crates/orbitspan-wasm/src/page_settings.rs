//! The fit settings as the page writes them: the plane group as its name
//! (`"p4m"`, `"pmg:ba"`) instead of the core's enum form, and optionally a
//! measured lattice to resample onto before fitting.

use orbitspan_core::plane_group::PlaneGroup;
use orbitspan_core::{BandSpec, FitSettings, Result};
use serde::{Deserialize, Serialize};

/// `{ group, cell_rows, cell_cols, origin: [row, col], generators, band, lattice_coords }`
/// with `band` either `null`, `{ kind: "frequencies", value: M }` or
/// `{ kind: "radius", value: R }`. With `lattice` (`null`, `{ mode: "detect" }`
/// or `{ mode: "vectors", a1: [r, c], a2: [r, c] }`) the fit runs on a grid
/// along the measured lattice with `samples` per cell side (`null`: about one
/// per pixel), as `orbitspan fit --lattice`; the cell, origin and
/// `lattice_coords` are then not used.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct PageSettings {
    pub group: String,
    pub cell_rows: usize,
    pub cell_cols: usize,
    pub origin: [usize; 2],
    pub generators: usize,
    pub band: Option<BandSpec>,
    #[serde(default)]
    pub lattice_coords: bool,
    #[serde(default)]
    pub lattice: Option<LatticeChoice>,
    #[serde(default)]
    pub samples: Option<usize>,
}

/// Where the lattice of a measured fit comes from: measured from the
/// stack's spectrum, or two vectors in pixels, `(row, column)` components.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
#[serde(tag = "mode", rename_all = "lowercase")]
pub enum LatticeChoice {
    Detect,
    Vectors { a1: [f64; 2], a2: [f64; 2] },
}

impl PageSettings {
    /// The core settings; an unknown group name is a bad-input error.
    pub fn to_core(&self) -> Result<FitSettings> {
        Ok(FitSettings {
            group: PlaneGroup::parse(&self.group)?,
            cell_rows: self.cell_rows,
            cell_cols: self.cell_cols,
            origin: self.origin,
            generators: self.generators,
            band: self.band,
            lattice_coords: self.lattice_coords,
        })
    }

    /// The page's form of core settings.
    pub fn from_core(settings: &FitSettings) -> PageSettings {
        PageSettings {
            group: settings.group.name(),
            cell_rows: settings.cell_rows,
            cell_cols: settings.cell_cols,
            origin: settings.origin,
            generators: settings.generators,
            band: settings.band,
            lattice_coords: settings.lattice_coords,
            lattice: None,
            samples: None,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use orbitspan_core::plane_group::{GroupSymbol, Setting};

    #[test]
    fn group_names_round_trip_through_core_settings() {
        let page = PageSettings {
            group: "pmg:ba".into(),
            cell_rows: 8,
            cell_cols: 12,
            origin: [2, 3],
            generators: 4,
            band: Some(BandSpec::Frequencies(40)),
            lattice_coords: false,
            lattice: None,
            samples: None,
        };
        let core = page.to_core().unwrap();
        assert_eq!(core.group.symbol, GroupSymbol::Pmg);
        assert_eq!(core.group.setting, Setting::Exchanged);
        assert_eq!(PageSettings::from_core(&core), page);
        let bad = PageSettings { group: "p7".into(), ..page };
        assert!(bad.to_core().unwrap_err().to_string().contains("unknown plane group 'p7'"));
    }
}
