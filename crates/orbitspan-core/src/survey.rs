//! Symmetry survey and fits on measured lattices (issue: measured lattices).
//!
//! For a plane group Γ acting on a lattice-aligned grid with its origin at
//! `o`, the Γ-average `A_o f = |Γ|⁻¹ Σ_γ π_o(γ) f` is an orthogonal projection,
//! so the stack's **deviation** from the symmetry is
//!
//! `D(o)² = Σ_i ||f_i − A_o f_i||² / Σ_i ||f_i||² = 1 − Σ_i ⟨f_i, A_o f_i⟩ / Σ_i ||f_i||²`,
//!
//! computed after removing each image's mean. Summing `⟨f, π_o(τ_k γ_g) f⟩`
//! over the lattice keeps only the reciprocal-lattice frequencies:
//!
//! `⟨f, A_o f⟩ = (|G| N)⁻¹ Σ_g Σ_{η∈Λ^⊥} f̂(η) conj(f̂(gᵀη)) e^{2πi η·((I−g)o + t_g)/n}`,
//!
//! which is a trigonometric polynomial in `o`, so the best symmetry centre is
//! searched continuously (a grid over one cell, then three finer grids).
//!
//! Noise makes `D` large for every group alike. The **cell deviation** `D_c`
//! is the same measure for the stack's mean unit cell (the lattice average,
//! whose Fourier coefficients are those on `Λ^⊥`): noise averages out over
//! the cells. Its expected value for pure noise is estimated from the energy
//! off the reciprocal lattice: `D_noise² = (1 − 1/|G|) d e_off / E_cell`, with
//! `e_off` the mean energy per off-lattice frequency. A group is called
//! *consistent* when `D_c ≤ max(3 D_noise, 0.03)` (the 0.03 allows for
//! resampling error). The survey ranks consistent groups first, the larger
//! point groups before their subgroups, then the rest by `D_c`.
//! `D = 0` for a stack with exact symmetry; a small `D` is a suggestion that
//! the group fits, not a proof (a noisy stack never reaches 0, and a group
//! contained in a fitting group fits at least as well).

use crate::error::{Error, Result};
use crate::fiber::Symmetry;
use crate::fit::{fit, Fit};
use crate::lattice_detect::{self, DetectOptions, Detection, LatticeKind, LatticeVectors};
use crate::plane_group::{GroupSymbol, LatticeType, PlaneGroup, Setting};
use crate::progress::Progress;
use crate::resample::{CellVectors, LatticeGrid};
use crate::settings::{BandSpec, FitSettings};
use crate::spectrum::fft2;
use crate::stack::{Image, Stack};
use num_complex::Complex64;
use serde::{Deserialize, Serialize};

/// Which cell a group is fitted on: the reduced (primitive) basis, or the
/// conventional centred-rectangular cell.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum CellChoice {
    Reduced,
    Conventional,
}

/// The groups offered for a lattice type, each with the cell it acts on.
/// Omitted (stated in the docs): cm and cmm with mirrors along the
/// diagonals of a square lattice or along the short diagonals of a
/// hexagonal one, whose conventional cell is not the measured basis.
pub fn candidates(kind: LatticeType) -> Vec<(PlaneGroup, CellChoice)> {
    use GroupSymbol::*;
    let std = |s| (PlaneGroup::standard(s), CellChoice::Reduced);
    let ex = |s| (PlaneGroup { symbol: s, setting: Setting::Exchanged }, CellChoice::Reduced);
    let rect = vec![std(P1), std(P2), std(Pm), ex(Pm), std(Pg), ex(Pg), std(Pmm), std(Pmg), ex(Pmg), std(Pgg)];
    match kind {
        LatticeType::Oblique => vec![std(P1), std(P2)],
        LatticeType::Rectangular => rect,
        LatticeType::Centred => vec![
            std(P1),
            std(P2),
            (PlaneGroup::standard(Cm), CellChoice::Conventional),
            (PlaneGroup { symbol: Cm, setting: Setting::Exchanged }, CellChoice::Conventional),
            (PlaneGroup::standard(Cmm), CellChoice::Conventional),
        ],
        LatticeType::Square => rect.into_iter().chain([std(P4), std(P4m), std(P4g)]).collect(),
        LatticeType::Hexagonal => vec![std(P1), std(P2), std(P3), std(P3m1), std(P31m), std(P6), std(P6m)],
    }
}

/// A lattice to work on: the reduced basis, the conventional cell, the
/// type, and the detection when it was measured. Front ends turn the user's
/// choice (detect, or two typed vectors) into one of these, and ask it for
/// the cell a plane group is fitted on.
#[derive(Clone, Debug)]
pub struct MeasuredLattice {
    pub reduced: LatticeVectors,
    pub conventional: LatticeVectors,
    pub kind: LatticeKind,
    pub detection: Option<Detection>,
}

impl MeasuredLattice {
    /// The lattice of a detection ([`lattice_detect::detect`]).
    pub fn detected(d: Detection) -> MeasuredLattice {
        MeasuredLattice { reduced: d.vectors.clone(), conventional: d.conventional.clone(), kind: d.kind, detection: Some(d) }
    }

    /// The lattice of two typed vectors in pixels: reduced, classified with
    /// the default tolerances, with its conventional cell. Vectors that span
    /// no lattice (zero, parallel, not finite) are a bad-input error.
    pub fn typed(a1: [f64; 2], a2: [f64; 2]) -> Result<MeasuredLattice> {
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
        Ok(MeasuredLattice { reduced, conventional, kind, detection: None })
    }

    /// The cell `group` is fitted on: the reduced basis, or the conventional
    /// cell for cm and cmm; a bad-input error naming the groups the lattice
    /// allows when it does not allow `group`.
    pub fn cell_for(&self, group: &PlaneGroup) -> Result<CellVectors> {
        let allowed = candidates(self.kind.lattice_type());
        match allowed.iter().find(|(g, _)| g == group) {
            Some((_, CellChoice::Conventional)) => Ok([self.conventional.a1, self.conventional.a2]),
            Some((_, CellChoice::Reduced)) => Ok([self.reduced.a1, self.reduced.a2]),
            None => {
                let names: Vec<String> = allowed.iter().map(|(g, _)| g.name()).collect();
                let needs = match group.symbol.lattice_type() {
                    LatticeType::Oblique => "oblique",
                    LatticeType::Rectangular => "rectangular",
                    LatticeType::Centred => "centred rectangular",
                    LatticeType::Square => "square",
                    LatticeType::Hexagonal => "hexagonal",
                };
                Err(Error::input(format!(
                    "{} needs a {needs} lattice; the lattice is {} (it allows {})",
                    group.name(),
                    self.kind,
                    names.join(", ")
                )))
            }
        }
    }
}

/// The grid a group needs on a cell: square torus for groups that rotate
/// or exchange the axes, even sample counts for glides and centring.
pub fn grid_for(height: usize, width: usize, cell: CellVectors, group: &PlaneGroup, samples: Option<usize>) -> Result<LatticeGrid> {
    let pg = group.point_group();
    let equal = pg.coset_representatives().iter().any(|o| o.g[0][1] != 0 || o.g[1][0] != 0);
    let even = group.symbol.is_centred() || pg.coset_representatives().iter().any(|o| o.half != [0, 0]);
    LatticeGrid::fit_inside(height, width, cell, samples.map(|s| [s, s]), equal, even)
}

fn resample_stack(stack: &Stack, grid: &LatticeGrid) -> Result<Stack> {
    Stack::new(stack.labels().iter().cloned().zip(stack.images().iter().map(|im| grid.to_lattice(im))).collect())
}

/// Deviation `D(o)` of a resampled stack from the group's symmetry and the
/// best origin `o` (in samples), searched over one cell.
pub fn deviation(grid_stack: &Stack, sym: &Symmetry) -> (f64, [f64; 2]) {
    let d = deviations(grid_stack, sym);
    (d.image, d.origin)
}

/// Deviations of a resampled stack from a group's symmetry at the best origin.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Deviations {
    /// `D`: whole images (mean removed).
    pub image: f64,
    /// `D_c`: the mean unit cell.
    pub cell: f64,
    /// Expected `D_c` from noise alone.
    pub noise: f64,
    /// Best origin in samples.
    pub origin: [f64; 2],
}

/// [`Deviations`] of a resampled stack (see the module documentation).
pub fn deviations(grid_stack: &Stack, sym: &Symmetry) -> Deviations {
    let l = sym.lattice();
    let [n1, n2] = l.torus();
    let dual = l.dual();
    // terms[g][k] = Σ_i f̂_i(η_k) conj(f̂_i(gᵀη_k)), η_k ∈ Λ^⊥ \ {0}
    let mut terms = vec![vec![Complex64::new(0.0, 0.0); dual.len()]; sym.order()];
    let mut energy = 0.0;
    let mut cell_energy = 0.0;
    for img in grid_stack.images() {
        let mean = img.pixels.iter().sum::<f64>() / img.pixels.len() as f64;
        let centred = Image::new(n1, n2, img.pixels.iter().map(|v| v - mean).collect());
        let spec = fft2(&centred);
        energy += spec.iter().map(|z| z.norm_sqr()).sum::<f64>();
        cell_energy += dual.iter().map(|&eta| spec[l.linear(eta)].norm_sqr()).sum::<f64>();
        for (g, op) in sym.ops().iter().enumerate() {
            for (k, &eta) in dual.iter().enumerate() {
                terms[g][k] += spec[l.linear(eta)] * spec[l.linear(l.dual_action(&op.g, eta))].conj();
            }
        }
    }
    if energy <= 0.0 || cell_energy <= 0.0 {
        return Deviations { image: 0.0, cell: 0.0, noise: 0.0, origin: [0.0, 0.0] };
    }
    // Signed frequencies in (−n/2, n/2]: the interpolating trigonometric
    // polynomial for a fractional origin needs the smallest representatives.
    let signed = |v: usize, n: usize| if 2 * v > n { v as f64 - n as f64 } else { v as f64 };
    let eta_real: Vec<[f64; 2]> = dual.iter().map(|e| [signed(e[0], n1) / n1 as f64, signed(e[1], n2) / n2 as f64]).collect();
    let score = |o: [f64; 2]| -> f64 {
        let mut acc = 0.0;
        for (g, op) in sym.ops().iter().enumerate() {
            // s = (I − g) o + t
            let s = [
                o[0] - (op.g[0][0] as f64 * o[0] + op.g[0][1] as f64 * o[1]) + op.t[0] as f64,
                o[1] - (op.g[1][0] as f64 * o[0] + op.g[1][1] as f64 * o[1]) + op.t[1] as f64,
            ];
            for (k, e) in eta_real.iter().enumerate() {
                let phase = std::f64::consts::TAU * (e[0] * s[0] + e[1] * s[1]);
                acc += (terms[g][k] * Complex64::from_polar(1.0, phase)).re;
            }
        }
        acc / sym.order() as f64
    };
    let cell = l.cell();
    let (mut best, mut best_o) = (f64::NEG_INFINITY, [0.0, 0.0]);
    let steps = 4.0;
    for i in 0..(cell[0] as f64 * steps) as usize {
        for j in 0..(cell[1] as f64 * steps) as usize {
            let o = [i as f64 / steps, j as f64 / steps];
            let v = score(o);
            if v > best + 1e-15 {
                best = v;
                best_o = o;
            }
        }
    }
    let mut step = 1.0 / steps;
    for _ in 0..3 {
        let centre = best_o;
        step /= 4.0;
        for i in -4i32..=4 {
            for j in -4i32..=4 {
                let o = [centre[0] + i as f64 * step, centre[1] + j as f64 * step];
                let v = score(o);
                if v > best + 1e-15 {
                    best = v;
                    best_o = o;
                }
            }
        }
    }
    let off = (n1 * n2 - dual.len()).max(1) as f64;
    let e_off = (energy - cell_energy) / off;
    let order = sym.order() as f64;
    Deviations {
        image: (1.0 - best / energy).max(0.0).sqrt(),
        cell: (1.0 - best / cell_energy).max(0.0).sqrt(),
        noise: ((1.0 - 1.0 / order) * dual.len() as f64 * e_off / cell_energy).sqrt(),
        origin: best_o,
    }
}

/// A fit on a measured lattice: the grid (with its origin at the symmetry
/// centre), the resampled stack, the fit on it, and the interpolation error.
#[derive(Clone, Debug)]
pub struct MeasuredFit {
    pub grid: LatticeGrid,
    pub grid_stack: Stack,
    pub fit: Fit,
    /// Deviations of the resampled stack from the group's symmetry at the grid origin.
    pub deviations: Deviations,
    /// Relative forward-and-back interpolation error on the data.
    pub resampling_error: f64,
}

/// Resamples the stack onto `cell`, finds the group's symmetry centre
/// (unless `origin_px` gives it in pixels), moves the grid origin there and
/// fits with `generators` generators.
pub fn fit_measured(
    stack: &Stack,
    cell: CellVectors,
    group: PlaneGroup,
    samples: Option<usize>,
    generators: usize,
    band: Option<BandSpec>,
    origin_px: Option<[f64; 2]>,
    progress: &mut dyn Progress,
) -> Result<MeasuredFit> {
    let plan = MeasuredPlan::new(stack, cell, group, samples, generators, band, origin_px)?;
    let fitted = fit(&plan.grid_stack, &plan.settings, progress)?;
    Ok(plan.finish(stack, fitted))
}

/// [`fit_measured`] before and after its fit, for callers that run the fit
/// elsewhere (the page spreads it over workers, [`crate::tasks`]): the
/// grid, the resampled stack and the settings to fit it with.
pub struct MeasuredPlan {
    pub grid: LatticeGrid,
    pub grid_stack: Stack,
    pub settings: FitSettings,
    deviations: Deviations,
}

impl MeasuredPlan {
    /// Everything [`fit_measured`] does before fitting.
    pub fn new(
        stack: &Stack,
        cell: CellVectors,
        group: PlaneGroup,
        samples: Option<usize>,
        generators: usize,
        band: Option<BandSpec>,
        origin_px: Option<[f64; 2]>,
    ) -> Result<MeasuredPlan> {
        let coarse = grid_for(stack.height(), stack.width(), cell, &group, samples)?;
        // The origin moves by less than one cell; a grid one cell smaller along
        // each axis then stays inside the searched grid's footprint.
        let shrink = |g: LatticeGrid| LatticeGrid { cells: [g.cells[0].max(2) - 1, g.cells[1].max(2) - 1], ..g };
        let grid = shrink(match origin_px {
            Some(p) => {
                let g = coarse.grid_of(p);
                // keep the grid inside the image: move by the offset modulo one cell
                let s = coarse.samples;
                coarse.shifted([g[0].rem_euclid(s[0] as f64), g[1].rem_euclid(s[1] as f64)])
            }
            None => {
                let grid_stack = resample_stack(stack, &coarse)?;
                let sym = Symmetry::new(coarse.size(), coarse.samples, &group)?;
                let (_, o) = deviation(&grid_stack, &sym);
                let s = coarse.samples;
                coarse.shifted([o[0].rem_euclid(s[0] as f64), o[1].rem_euclid(s[1] as f64)])
            }
        });
        let grid_stack = resample_stack(stack, &grid)?;
        let settings = FitSettings {
            group,
            cell_rows: grid.samples[0],
            cell_cols: grid.samples[1],
            origin: [0, 0],
            generators,
            band,
            lattice_coords: true,
        };
        let sym = Symmetry::new(grid.size(), grid.samples, &group)?;
        let deviations = deviations(&grid_stack, &sym);
        Ok(MeasuredPlan { grid, grid_stack, settings, deviations })
    }

    /// The measured fit from the fit of [`MeasuredPlan::grid_stack`]
    /// (`stack`: the images in pixels, for the interpolation error).
    pub fn finish(self, stack: &Stack, fitted: Fit) -> MeasuredFit {
        let resampling_error = self.grid.round_trip_error(stack.images());
        MeasuredFit { grid: self.grid, grid_stack: self.grid_stack, fit: fitted, deviations: self.deviations, resampling_error }
    }
}

/// One row of the survey table.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct SurveyRow {
    pub group: String,
    pub cell: CellChoice,
    /// Deviation `D` of the images from the group's symmetry at the best centre.
    pub deviation: f64,
    /// Deviation `D_c` of the mean unit cell.
    pub cell_deviation: f64,
    /// Expected `D_c` from noise alone.
    pub noise_level: f64,
    /// `D_c ≤ max(3 D_noise, 0.03)`.
    pub consistent: bool,
    /// Point-group order `|G|`.
    pub order: usize,
    /// The best symmetry centre in pixel coordinates.
    pub centre: [f64; 2],
    /// Relative fit error with the requested number of generators.
    pub relative_error: f64,
}

/// Ranks every group the lattice type allows: consistent groups first,
/// larger point groups first among them, then by cell deviation and fit
/// error (see the module documentation). `reduced` is the reduced basis, `conventional` the centred
/// rectangular cell (used only for cm and cmm).
pub fn survey(
    stack: &Stack,
    kind: LatticeType,
    reduced: CellVectors,
    conventional: CellVectors,
    samples: Option<usize>,
    generators: usize,
    progress: &mut dyn Progress,
) -> Result<Vec<SurveyRow>> {
    let list = candidates(kind);
    let mut rows = Vec::with_capacity(list.len());
    for (k, (group, choice)) in list.iter().enumerate() {
        if !progress.update("surveying plane groups", k as f64 / list.len() as f64) {
            return Err(Error::Cancelled);
        }
        let cell = if *choice == CellChoice::Conventional { conventional } else { reduced };
        let m = fit_measured(stack, cell, *group, samples, generators, None, None, &mut crate::progress::Silent)?;
        let n = m.fit.report.error_curve.len();
        let dv = m.deviations;
        rows.push(SurveyRow {
            group: group.name(),
            cell: *choice,
            deviation: dv.image,
            cell_deviation: dv.cell,
            noise_level: dv.noise,
            consistent: dv.cell <= (3.0 * dv.noise).max(0.03),
            order: group.point_group().order(),
            centre: m.grid.origin,
            relative_error: m.fit.report.error_curve[n - 1].relative_error,
        });
    }
    rows.sort_by(|a, b| {
        b.consistent
            .cmp(&a.consistent)
            .then(if a.consistent && b.consistent { b.order.cmp(&a.order) } else { std::cmp::Ordering::Equal })
            .then(a.cell_deviation.total_cmp(&b.cell_deviation))
            .then(a.relative_error.total_cmp(&b.relative_error))
    });
    Ok(rows)
}
