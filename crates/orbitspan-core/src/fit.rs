//! The exact fit: optimal Γ-invariant space of length `≤ L` for every `L`
//! up to the requested count, from one decomposition per fiber orbit
//! (MATH.md §4).
//!
//! Per orbit with representative `ξ0`, stabiliser `H` and `r` points:
//! pool the fibers `v_{g,i}` of `π(γ_g) f_i` at `ξ0` into `Y` (`d x m|G|`),
//! form `C̃ = Y Yᴴ / |H|` (covariance path) or the Gram matrix `Yᴴ Y / |H|`
//! (same non-zero spectrum, used when `m|G| < d`), split it into isotypic
//! blocks of the stabiliser's (projective) action, and in a block of type
//! dimension `s` give eigenvalue number `e` (largest first) to layer
//! `⌊e / (r s²)⌋`: layer `l` holds the `r s` copies that generator `l + 1`
//! adds. The optimal error with `L` generators is
//! `E(L) = ||F − P_Ω F||² + Σ_orbits Σ_{layer ≥ L} λ / |T|`
//! (summing discarded eigenvalues, not subtracting).

use crate::band::{self, Band};
use crate::eigen;
use crate::error::{Error, Result};
use crate::fiber::{for_each_parallel, Gather, Orbit, Symmetry};
use crate::frame::{self, Generator};
use crate::isotypic::{isotypic_blocks, Block, Monomial, SparseBasis};
use crate::matmul::{self, Part};
use crate::model::Model;
use crate::progress::Progress;
use crate::report::{BandReport, CurvePoint, GeneratorInfo, ImageError, Report};
use crate::pair_fibers::{self, ImagePlace, PairFibers};
use crate::settings::{BandSpec, FitSettings};
use crate::spectrum::PackedPair;
use crate::stack::{Image, Stack};
use nalgebra::{DMatrix, DVector};
use num_complex::Complex64;
use std::sync::Mutex;

/// Which matrix to decompose per orbit: the `d x d` covariance or the
/// `m|G| x m|G|` Gram matrix. `Auto` takes the smaller; the others exist so
/// tests and benchmarks can check that both give the same result.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default)]
pub enum FiberPath {
    #[default]
    Auto,
    Covariance,
    Gram,
}

/// A finished fit: the report (error curve, per-image errors, band terms,
/// generator facts) and the model (settings and generators).
#[derive(Clone, Debug)]
pub struct Fit {
    pub report: Report,
    pub model: Model,
    /// The chosen frequency set `Ω` when the fit is band-limited (row-major
    /// mask over the spectrum, in the group frame: frequencies are unchanged
    /// by the origin shift, which only changes phases).
    pub band: Option<Band>,
}

/// Per-orbit result: captured energy per layer, the energy beyond the last
/// layer, and an orthonormal basis of each layer's fiber at `ξ0`.
#[derive(Clone)]
pub(crate) struct OrbitSolution {
    pub layer_energy: Vec<f64>,
    pub tail: f64,
    pub layers: Vec<DMatrix<Complex64>>,
    /// Per image, the energy its fibers on this orbit keep outside all
    /// `lmax` layers (spectrum units: divide by `|T|`).
    pub image_discarded: Vec<f64>,
    /// `S` when every layer's basis is `S Z` with `Z` real and `S`
    /// diagonal and unimodular (an untwisted orbit: see
    /// [`untwisted_covariance`] and [`UntwistedGram`]), so that products
    /// with the layers can be made in real arithmetic.
    pub twist: Option<Vec<Complex64>>,
}

/// Checks settings against an image size without fitting: the same errors
/// a fit would give (cell divisibility, group needs, generator count).
pub fn validate(height: usize, width: usize, settings: &FitSettings) -> Result<Symmetry> {
    let name = settings.group.name();
    if settings.group.symbol.is_hexagonal() && !settings.lattice_coords {
        return Err(Error::input(format!(
            "plane group {name} is hexagonal: it acts only on images sampled in lattice coordinates (declare them so, or resample)"
        )));
    }
    if settings.origin[0] >= height || settings.origin[1] >= width {
        return Err(Error::input(format!(
            "origin {},{} lies outside the {}x{} image",
            settings.origin[0], settings.origin[1], height, width
        )));
    }
    let sym = Symmetry::new([height, width], [settings.cell_rows, settings.cell_cols], &settings.group)?;
    let d = sym.lattice().fiber_len();
    if settings.generators == 0 {
        return Err(Error::input("the number of generators must be at least 1"));
    }
    if settings.generators > d {
        return Err(Error::input(format!(
            "{} generators is more than the {d} pixels in one cell; at most {d} can add anything",
            settings.generators
        )));
    }
    Ok(sym)
}

/// Fits the stack: see the module documentation. Progress stages:
/// "transforming images", "fitting frequencies", "building generators".
/// Residual images are not made here: [`Model::project`] makes one when it
/// is shown or exported.
pub fn fit(stack: &Stack, settings: &FitSettings, progress: &mut dyn Progress) -> Result<Fit> {
    fit_with_path(stack, settings, FiberPath::Auto, progress)
}

/// [`fit`] with a forced choice of covariance or Gram matrices.
///
/// The work per orbit pair ([`orbit_pairs`]) runs on several threads; each
/// pair's result does not depend on the others or on the thread count. The
/// same pairs can run in other processes through [`crate::tasks`].
pub fn fit_with_path(stack: &Stack, settings: &FitSettings, path: FiberPath, progress: &mut dyn Progress) -> Result<Fit> {
    let mut prepared = Prepared::new(stack, settings, path, progress)?;
    // Each pair's fibers are dropped once the pair is solved, while the
    // generator shares grow (see `frame::GeneratorSpectra`).
    let kept = prepared.fibers.take_pairs();
    let pairs = &prepared.pairs;
    let references = frame::References::new(prepared.sym.lattice().torus());
    let mut collected = Collected::new(&prepared);
    let mut done = 0;
    check(progress, "fitting frequencies", 0.0)?;
    for_each_parallel(
        pairs.len(),
        |k| {
            let (sym, orbits) = (&prepared.sym, &prepared.orbits);
            let fibers = std::mem::take(&mut *kept[k].lock().expect("pair fibers"));
            solve_kept_pair(sym, orbits, &pairs[k], &fibers, prepared.images, prepared.lmax, path, &references)
        },
        |_, pair| {
            for (o, result) in pair? {
                collected.absorb(o, result);
            }
            done += 1;
            check(progress, "fitting frequencies", done as f64 / pairs.len() as f64)
        },
    )?;
    prepared.finish(collected, progress)
}

/// The orbit results as they arrive, in any order. Each orbit's share of
/// the generators is kept at its primary points only
/// ([`frame::GeneratorSpectra`]), so the per-orbit matrices are not held
/// whole. Generator images made elsewhere from a taken layer wait in
/// `made` until the fit finishes.
pub(crate) struct Collected {
    results: Vec<Option<OrbitResult>>,
    generators: frame::GeneratorSpectra,
    made: Vec<Option<Generator>>,
}

impl Collected {
    pub fn new(prepared: &Prepared) -> Collected {
        Collected {
            results: (0..prepared.orbits.len()).map(|_| None).collect(),
            generators: frame::GeneratorSpectra::new(&prepared.sym, &prepared.orbits, prepared.lmax),
            made: (0..prepared.lmax).map(|_| None).collect(),
        }
    }

    /// Stores orbit `o`'s result (its generator share kept at its primary
    /// points by the generator spectra).
    pub fn absorb(&mut self, o: usize, mut result: OrbitResult) {
        let share = std::mem::take(&mut result.generator);
        self.generators.write(o, &share);
        self.results[o] = Some(result);
    }

    /// Stores orbit `o`'s result whose generator share was cut to the
    /// orbit's primary points already (`kept`, per layer).
    pub fn absorb_kept(&mut self, o: usize, result: OrbitResult, kept: Vec<Option<DMatrix<Complex64>>>) {
        self.generators.write_kept(o, kept);
        self.results[o] = Some(result);
    }

    /// Orbit `o`'s primary points (see [`frame::primary_points`]).
    pub fn primary(&self, o: usize) -> &[usize] {
        &self.generators.primary()[o]
    }

    /// How many orbits have no result yet.
    pub fn missing(&self) -> usize {
        self.results.iter().filter(|r| r.is_none()).count()
    }

    /// Generator `l`'s realness defect `Σ_ξ |φ̂_l(ξ) − conj φ̂_l(−ξ)|²`,
    /// summed in orbit order over the orbits with a result.
    pub fn defect(&self, l: usize) -> f64 {
        self.results.iter().flatten().map(|s| s.realness_defect[l]).sum()
    }

    /// Takes generator `l`'s layer of the shares, to make its image
    /// elsewhere ([`frame::generator_image`]); the image is then given back
    /// with [`Collected::put_generator`].
    pub fn take_generator_layer(&mut self, l: usize) -> frame::LayerShares {
        self.generators.take_layer(l)
    }

    /// Generator `l`'s image, made elsewhere from its taken layer.
    pub fn put_generator(&mut self, l: usize, generator: Generator) {
        self.made[l] = Some(generator);
    }

    /// Whether generator `l`'s image was given.
    pub fn has_generator(&self, l: usize) -> bool {
        self.made[l].is_some()
    }
}

/// A fit after the transforms: the symmetry, the orbits and their pairs,
/// the spectra every pair reads, and what the report needs of the stack.
pub(crate) struct Prepared {
    pub settings: FitSettings,
    pub path: FiberPath,
    pub sym: Symmetry,
    pub orbits: Vec<Orbit>,
    /// The units of work: [`orbit_pairs`].
    pub pairs: Vec<Vec<usize>>,
    pub lmax: usize,
    /// The number of images.
    pub images: usize,
    /// Spectra of the images in the group frame (restricted to the band),
    /// kept by pair, half of them (see [`crate::pair_fibers`]).
    pub fibers: PairFibers,
    /// Per image, `||f_i − P_Ω f_i||²` (zero without a band).
    pub outside_per_image: Vec<f64>,
    pub band: Option<Band>,
    pub height: usize,
    pub width: usize,
    pub labels: Vec<String>,
    pub energies: Vec<f64>,
    pub total_energy: f64,
}

impl Prepared {
    /// Validates, transforms every image (moved so that `origin` sits at
    /// pixel (0, 0)) and applies the band limit:
    /// `E(F,S) = E(P_Ω F, S) + ||F − P_Ω F||²`. One image's whole spectrum
    /// at a time; a band of the `M` most energetic frequencies first needs
    /// the stack's power per frequency, so its images are transformed twice.
    pub fn new(stack: &Stack, settings: &FitSettings, path: FiberPath, progress: &mut dyn Progress) -> Result<Prepared> {
        let (h, w) = (stack.height(), stack.width());
        let sym = validate(h, w, settings)?;
        let orbits = sym.orbits();
        let pairs = orbit_pairs(&sym, &orbits);
        let m = stack.len();
        // Images two at a time, as one complex transform (`PackedPair`).
        let pair_count = m.div_ceil(2);
        let transform = |k: usize| {
            let images = stack.images();
            PackedPair::transform(&images[2 * k], images.get(2 * k + 1), settings.origin)
        };
        let by_power = matches!(settings.band, Some(BandSpec::Frequencies(_)));
        let band: Option<Band> = match &settings.band {
            Some(spec) => {
                let mut power = Vec::new();
                if by_power {
                    power = vec![0.0; h * w];
                    for k in 0..pair_count {
                        check(progress, "transforming images", k as f64 / (2 * pair_count) as f64)?;
                        transform(k).add_power(&mut power);
                    }
                }
                Some(band::select(&sym, spec, &power, settings.group.symbol.is_hexagonal())?)
            }
            None => None,
        };
        let (done, total) = if by_power { (pair_count, 2 * pair_count) } else { (0, pair_count) };
        let mut fibers = PairFibers::new(&sym, &orbits, &pairs, m);
        let mut outside_per_image = vec![0.0; m];
        // Pairs of images on threads, each image stored straight from the
        // pair's transform into its own place: the same values whatever
        // the thread count or order.
        check(progress, "transforming images", done as f64 / total as f64)?;
        let mut stored = 0;
        let places: Vec<Mutex<Option<ImagePlace>>> = fibers.places().into_iter().map(|p| Mutex::new(Some(p))).collect();
        let take = |i: usize| places[i].lock().expect("image place").take().expect("each image is stored once");
        for_each_parallel(
            pair_count,
            |k| {
                let packed = transform(k);
                let mut outside = [0.0; 2];
                let mut whole = Vec::new();
                for (second, i) in [false, true].into_iter().zip(2 * k..m.min(2 * k + 2)) {
                    let value = |ix: usize, neg: usize| if second { packed.second_at(ix, neg) } else { packed.first_at(ix, neg) };
                    match &band {
                        Some(b) => {
                            // The band zeroes whole frequencies: restrict
                            // the image's whole spectrum, then store it.
                            whole.resize(h * w, Complex64::new(0.0, 0.0));
                            match second {
                                false => packed.first_into(&mut whole),
                                true => packed.second_into(&mut whole),
                            }
                            outside[second as usize] = b.restrict(&mut whole);
                            take(i).fill(|ix, _| whole[ix]);
                        }
                        None => take(i).fill(value),
                    }
                }
                outside
            },
            |k, outside| {
                for (i, o) in (2 * k..m.min(2 * k + 2)).zip(outside) {
                    outside_per_image[i] = o;
                }
                stored += 1;
                check(progress, "transforming images", (done + stored) as f64 / total as f64)
            },
        )?;
        drop(places);
        fibers.finish_filling();
        // Each image's energy once; their sum in image order is `Stack::energy`.
        let energies: Vec<f64> = stack.images().iter().map(Image::energy).collect();
        let total_energy = energies.iter().sum();
        Ok(Prepared {
            settings: settings.clone(),
            path,
            orbits,
            pairs,
            sym,
            lmax: settings.generators,
            images: m,
            fibers,
            outside_per_image,
            band,
            height: h,
            width: w,
            labels: stack.labels().to_vec(),
            energies,
            total_energy,
        })
    }

    /// The curve, the generators, the per-image errors and the report from
    /// every orbit's result (indexed by orbit). Sums run in orbit order, so
    /// the result does not depend on where or in which order orbits were
    /// solved.
    pub fn finish(mut self, collected: Collected, progress: &mut dyn Progress) -> Result<Fit> {
        self.fibers = PairFibers::new(&self.sym, &self.orbits, &[], 0);
        let missing = collected.missing();
        if missing > 0 {
            return Err(Error::Internal(format!("{missing} of {} frequency orbits have no result", collected.results.len())));
        }
        let defects: Vec<f64> = (0..self.lmax).map(|l| collected.defect(l)).collect();
        let Collected { results, generators, made } = collected;
        let results: Vec<OrbitResult> = results.into_iter().flatten().collect();
        let (h, w, lmax) = (self.height, self.width, self.lmax);
        let pixels = (h * w) as f64;
        let outside: f64 = self.outside_per_image.iter().sum();
        let total_energy = self.total_energy;
        let mut curve = Vec::with_capacity(lmax);
        for l in 1..=lmax {
            let discarded: f64 = results.iter().map(|s| s.tail + s.layer_energy[l..].iter().sum::<f64>()).sum();
            let error = outside + discarded / pixels;
            curve.push(CurvePoint { generators: l, error, relative_error: ratio(error, total_energy) });
        }
        check(progress, "building generators", 0.0)?;
        let generators = generators.into_generators(&self.sym, &self.orbits, &defects, self.settings.origin, made);
        check(progress, "building generators", 1.0)?;
        let layer_dims: Vec<usize> = (0..lmax)
            .map(|l| self.orbits.iter().zip(&results).map(|(o, s)| o.points.len() * s.layer_dims[l]).sum())
            .collect();
        let norms_squared: Vec<f64> = generators.iter().map(|g| g.image.energy()).collect();
        let imaginary_parts: Vec<f64> = generators.iter().map(|g| g.imaginary_part).collect();
        let model = Model::new(self.settings.clone(), h, w, generators.into_iter().map(|g| g.image).collect())?;
        // Per-image errors ||f_i − P_V f_i||² from the orbit results (the
        // model's frame projection, `Model::evaluate`, is the slow reference).
        let images: Vec<ImageError> = self
            .labels
            .iter()
            .zip(&self.energies)
            .enumerate()
            .map(|(i, (label, &energy))| {
                let error = self.outside_per_image[i] + results.iter().map(|s| s.image_discarded[i]).sum::<f64>() / pixels;
                ImageError { file: label.clone(), energy, error, relative_error: ratio(error, energy) }
            })
            .collect();

        let mut infos = Vec::with_capacity(lmax);
        for l in 0..lmax {
            let before = if l == 0 { total_energy } else { curve[l - 1].error };
            let captured = (before - curve[l].error).max(0.0);
            infos.push(GeneratorInfo {
                index: l + 1,
                norm_squared: norms_squared[l],
                captured_energy: captured,
                captured_share: ratio(captured, total_energy),
                layer_dimension: layer_dims[l],
                imaginary_part: imaginary_parts[l],
            });
        }
        let band_report = self.band.as_ref().map(|b| BandReport {
            frequencies: b.len(),
            outside_energy: outside,
            inside_error: curve[lmax - 1].error - outside,
        });
        let report = Report {
            format: "orbitspan-report".into(),
            version: 1,
            settings: self.settings.clone(),
            height: h,
            width: w,
            point_group_order: self.sym.order(),
            cell_pixels: self.sym.lattice().fiber_len(),
            total_energy,
            error_curve: curve,
            images,
            band: band_report,
            generators: infos,
        };
        Ok(Fit { report, model, band: self.band })
    }
}

/// The orbits in the groups that are solved together: each orbit `O` with
/// its conjugate `−O` (the orbit holding `−ξ0`) when that is another orbit,
/// `O` first (the smaller index). `−O` reuses the reference images chosen
/// for `O`, so the generators come out real (see [`crate::frame`]).
pub(crate) fn orbit_pairs(sym: &Symmetry, orbits: &[Orbit]) -> Vec<Vec<usize>> {
    let l = sym.lattice();
    let mut orbit_of_fiber = vec![0; l.fiber_count()];
    for (o, orbit) in orbits.iter().enumerate() {
        for &(f, _) in &orbit.points {
            orbit_of_fiber[f] = o;
        }
    }
    let mut pairs = Vec::new();
    for (o, orbit) in orbits.iter().enumerate() {
        let c = orbit_of_fiber[l.fiber_of(l.neg(orbit.rep))];
        if c == o {
            pairs.push(vec![o]);
        } else if c > o {
            pairs.push(vec![o, c]);
        }
    }
    pairs
}

/// One orbit's share of the fit: what the curve, the per-image errors and
/// the generators need of it (its layer bases are dropped once its share
/// of the generators is made).
#[derive(Clone, Debug, PartialEq)]
pub(crate) struct OrbitResult {
    /// Captured energy per layer (spectrum units).
    pub layer_energy: Vec<f64>,
    /// Energy beyond the last layer.
    pub tail: f64,
    /// Per image, the energy its fibers keep outside all layers.
    pub image_discarded: Vec<f64>,
    /// Per layer, its dimension at `ξ0` (columns of its basis).
    pub layer_dims: Vec<usize>,
    /// Per layer, the reference image chosen and `T_jᴴ φ_l(ξ_j)` for every
    /// point `j` (columns; none for an empty layer). Emptied once the
    /// generator spectra keep it ([`Collected::absorb`]).
    pub generator: Vec<(u64, DMatrix<Complex64>)>,
    /// Per layer, this orbit's part of the realness defect (see
    /// [`frame::make_hermitian`]), measured before its share was made
    /// conjugate-symmetric.
    pub realness_defect: Vec<f64>,
}

/// Solves the orbits of one pair (see [`orbit_pairs`]): decomposition, then
/// each orbit's share of the generators, the conjugate with the first
/// orbit's choice of reference images.
pub(crate) fn solve_pair(
    sym: &Symmetry,
    orbits: &[Orbit],
    pair: &[usize],
    fibers: &Fibers,
    lmax: usize,
    path: FiberPath,
    references: &frame::References,
) -> Result<Vec<(usize, OrbitResult)>> {
    let mut out: Vec<(usize, OrbitResult)> = Vec::with_capacity(pair.len());
    for &o in pair {
        let orbit = &orbits[o];
        let solution = solve_orbit(sym, orbit, fibers, lmax, path)?;
        let forced: Option<Vec<u64>> = out.first().map(|(_, first)| first.generator.iter().map(|g| g.0).collect());
        let generator = frame::orbit_generators(sym, orbit, &solution, lmax, forced.as_deref(), references)?;
        out.push((
            o,
            OrbitResult {
                layer_dims: solution.layers.iter().map(|q| q.ncols()).collect(),
                layer_energy: solution.layer_energy,
                tail: solution.tail,
                image_discarded: solution.image_discarded,
                generator,
                realness_defect: Vec::new(),
            },
        ));
    }
    // Each orbit's frequencies against their negatives in the conjugate orbit.
    let pair_orbits: Vec<&Orbit> = out.iter().map(|(o, _)| &orbits[*o]).collect();
    let mut shares: Vec<&mut Vec<(u64, DMatrix<Complex64>)>> = out.iter_mut().map(|(_, r)| &mut r.generator).collect();
    let defects = frame::make_hermitian(sym, &pair_orbits, &mut shares);
    for ((_, result), defect) in out.iter_mut().zip(defects) {
        result.realness_defect = defect;
    }
    Ok(out)
}

/// Solves one pair from its kept fibers (`kept`: image-major, see
/// [`PairFibers::pair`]): the fibers are expanded into one buffer per image
/// and read through localised gathers. The in-process fit and every task
/// go through here, so they compute the same numbers.
#[allow(clippy::too_many_arguments)]
pub(crate) fn solve_kept_pair(
    sym: &Symmetry,
    orbits: &[Orbit],
    pair: &[usize],
    kept: &[Complex64],
    images: usize,
    lmax: usize,
    path: FiberPath,
    references: &frame::References,
) -> Result<Vec<(usize, OrbitResult)>> {
    let buffers = pair_fibers::expand(sym, orbits, pair, kept, images)?;
    pair_fibers::with_slots(sym, orbits, pair, |slot| {
        solve_pair(sym, orbits, pair, &Fibers { buffers: &buffers, slot }, lmax, path, references)
    })
}

/// Where an orbit's fibers are read: compact buffers that hold only the
/// fibers of its pair (fiber `f` at slot `slot[f]`, see
/// [`Symmetry::gather_local`]), one buffer per image.
pub(crate) struct Fibers<'a> {
    buffers: &'a [Vec<Complex64>],
    slot: &'a [usize],
}

impl Fibers<'_> {
    /// One buffer per image.
    fn data(&self) -> &[Vec<Complex64>] {
        self.buffers
    }
    /// [`Symmetry::gather`] reading from [`Fibers::data`].
    fn gather(&self, sym: &Symmetry, xi: [usize; 2], op: usize) -> Gather {
        sym.gather_local(xi, op, self.slot)
    }
}

pub(crate) fn ratio(a: f64, b: f64) -> f64 {
    if b > 0.0 {
        a / b
    } else {
        0.0
    }
}

pub(crate) fn check(progress: &mut dyn Progress, stage: &str, fraction: f64) -> Result<()> {
    if progress.update(stage, fraction) {
        Ok(())
    } else {
        Err(Error::Cancelled)
    }
}

/// Moves pixel `origin` to `(0, 0)`: `out(x) = f(x + origin)` (the
/// reference for [`group_frame_spectrum`]).
#[cfg(test)]
pub(crate) fn to_group_frame(img: &Image, origin: [usize; 2]) -> Image {
    img.shifted((img.height - origin[0]) % img.height, (img.width - origin[1]) % img.width)
}

/// The spectrum of [`to_group_frame`]`(img, origin)`, read straight into
/// the transform's buffer (no shifted copy of the image).
pub(crate) fn group_frame_spectrum(img: &Image, origin: [usize; 2]) -> Vec<Complex64> {
    PackedPair::transform(img, None, origin).into_first()
}

/// [`group_frame_spectrum`] of each image, two real images per complex
/// transform ([`PackedPair`]): half the transforms of one each.
#[cfg(test)]
pub(crate) fn group_frame_spectra(images: &[Image], origin: [usize; 2]) -> Vec<Vec<Complex64>> {
    group_frame_spectra_into(images, origin, |s| s)
}

/// `keep` of each image's [`group_frame_spectrum`], two images per
/// complex transform ([`PackedPair`]), each spectrum handed over as soon
/// as it is made: at most two whole spectra exist at once, however many
/// images there are.
pub(crate) fn group_frame_spectra_into<T>(images: &[Image], origin: [usize; 2], mut keep: impl FnMut(Vec<Complex64>) -> T) -> Vec<T> {
    let mut out = Vec::with_capacity(images.len());
    for pair in images.chunks(2) {
        let packed = PackedPair::transform(&pair[0], pair.get(1), origin);
        let second = packed.has_second().then(|| {
            let mut b = vec![Complex64::new(0.0, 0.0); pair[0].pixels.len()];
            packed.second_into(&mut b);
            b
        });
        out.push(keep(packed.into_first()));
        out.extend(second.map(&mut keep));
    }
    out
}

/// Moves pixel `(0, 0)` back to `origin`: `out(x) = f(x − origin)`.
pub(crate) fn from_group_frame(img: &Image, origin: [usize; 2]) -> Image {
    img.shifted(origin[0], origin[1])
}

/// The Gram-side action of a stabiliser element: `U_h Y = Y Π_h` with
/// `Π_h[(hg, i), (g, i)] = e^{−2πi ξ0·k/n}`, `γ_h γ_g = τ_k γ_{hg}`.
fn gram_unitary(sym: &Symmetry, xi0: [usize; 2], h: usize, images: usize) -> Monomial {
    let gcount = sym.order();
    let mut perm = vec![0; gcount * images];
    let mut phase = vec![Complex64::new(0.0, 0.0); gcount * images];
    for c in 0..gcount {
        let target = sym.product(h, c);
        let turns = sym.lattice().turns(xi0, sym.cocycle_shift(h, c));
        let p = Complex64::from_polar(1.0, -2.0 * std::f64::consts::PI * turns);
        for i in 0..images {
            perm[target * images + i] = c * images + i;
            phase[target * images + i] = p;
        }
    }
    Monomial { perm, phase }
}

/// Decomposes one orbit (see the module documentation).
///
/// Covariance path: with `v_g` the fiber at `ξ0` of `π(γ_g) f` and
/// `U_h v_g = c · v_{hg}` (`|c| = 1`, see [`gram_unitary`]), the sum over `G`
/// is a sum over the orbit's points (one element `p` per right coset `Hp`):
/// `Σ_g v_g v_gᴴ = Σ_{h∈H} U_h (Σ_p v_p v_pᴴ) U_hᴴ`, so only `r` of the `|G|`
/// gathers per image are multiplied out and the stabiliser is applied to the
/// `d x d` result.
pub(crate) fn solve_orbit(
    sym: &Symmetry,
    orbit: &Orbit,
    fibers: &Fibers,
    lmax: usize,
    path: FiberPath,
) -> Result<OrbitSolution> {
    let spectra = fibers.data();
    let gcount = sym.order();
    let m = spectra.len();
    let d = sym.lattice().fiber_len();
    let r = orbit.points.len();
    let hsize = orbit.stabiliser.len() as f64;
    let use_gram = match path {
        FiberPath::Auto => gcount * m < d,
        FiberPath::Covariance => false,
        FiberPath::Gram => true,
    };
    let point_gathers: Vec<Gather> = orbit.points.iter().map(|&(_, op)| fibers.gather(sym, orbit.rep, op)).collect();
    // Mirror couples (a trivial stabiliser, or one real untwisted): the
    // untwisted covariance `C' = Sᴴ C S` (real symmetric, symmetrised over
    // the stabiliser) and `S`, and the couples' first points.
    let mut untwisted: Option<(DMatrix<f64>, Vec<Complex64>, Vec<Gather>)> = None;
    // Covariance path with a stabiliser that stays real untwisted: the
    // isotypic blocks of the untwisted stabiliser, with real bases.
    let mut untwisted_blocks: Option<Vec<Block>> = None;
    // Gram path, the same orbits (with a stabiliser when it is real
    // untwisted and its blocks are of type dimension 1): per block the real
    // Gram matrix `XᵀX` and `X`.
    let mut untwisted_gram: Option<UntwistedGram> = None;
    let gram_couples = match use_gram {
        true => real_gram_couples(sym, orbit, fibers, &point_gathers)?,
        false => None,
    };
    let (x, ops, y) = if let Some((primary, s, ops, blocks)) = gram_couples {
        let u = untwisted_gram_vectors(&primary, spectra, &s);
        untwisted_blocks = blocks;
        untwisted_gram = Some(UntwistedGram { u, s, primary, grams: Vec::new() });
        (DMatrix::zeros(0, 0), ops, None)
    } else if use_gram {
        let gathers: Vec<Gather> = (0..gcount).map(|g| fibers.gather(sym, orbit.rep, g)).collect();
        let mut y = DMatrix::<Complex64>::zeros(d, gcount * m);
        for (g, gather) in gathers.iter().enumerate() {
            for (i, s) in spectra.iter().enumerate() {
                gather.apply_into(s, y.column_mut(g * m + i).as_mut_slice());
            }
        }
        let ops: Vec<Monomial> = orbit.stabiliser.iter().map(|&h| gram_unitary(sym, orbit.rep, h, m)).collect();
        let parts = split(&y);
        // A trivial stabiliser (`|H| = 1`): the whole Gram matrix; with a
        // stabiliser each block's is made from `Y B` below.
        let x = match ops.len() <= 1 {
            true => gram(&parts.0, &parts.1),
            false => DMatrix::zeros(0, 0),
        };
        (x, ops, Some(parts))
    } else {
        let ops = orbit
            .stabiliser
            .iter()
            .map(|&h| sym.fiber_unitary(orbit.rep, h))
            .collect::<Result<Vec<_>>>()?;
        let x = match mirror_halves(sym, orbit, fibers, &point_gathers) {
            Some((primary, d)) => {
                let s: Vec<Complex64> = d.iter().map(|z| z.sqrt()).collect();
                let real = untwisted_covariance(&primary, spectra, &s);
                if ops.len() <= 1 {
                    // Decomposed as it is (below); no complex matrix is made.
                    untwisted = Some((real, s, primary));
                    DMatrix::zeros(0, 0)
                } else if let Some((real_ops, blocks)) = untwisted_stabiliser(&ops, &s) {
                    // The stabiliser real in the untwisted frame too: all
                    // of it in real arithmetic (see `untwisted_stabiliser`).
                    let c = symmetrised_real(&real, &real_ops) / hsize;
                    untwisted = Some((c, s, primary));
                    untwisted_blocks = Some(blocks);
                    DMatrix::zeros(0, 0)
                } else {
                    symmetrised(&retwisted(&real, &s), &ops) * Complex64::new(1.0 / hsize, 0.0)
                }
            }
            None => symmetrised(&pooled_covariance(&point_gathers, spectra), &ops) * Complex64::new(1.0 / hsize, 0.0),
        };
        (x, ops, None)
    };
    let n = match (&untwisted, &untwisted_gram, &y) {
        (Some(c), ..) => c.0.nrows(),
        (None, Some(g), _) => g.u.ncols(),
        (None, None, Some(_)) => gcount * m,
        (None, None, None) => x.nrows(),
    };
    let blocks = match untwisted_blocks {
        Some(blocks) => blocks,
        None => isotypic_blocks(n, &ops)?,
    };
    // A trivial stabiliser gives one block with the identity as basis;
    // otherwise each block's basis by its nonzero entries, made once.
    let whole = blocks.len() == 1 && ops.len() <= 1;
    let sparse: Vec<&SparseBasis> = if whole { Vec::new() } else { blocks.iter().map(|b| &b.basis).collect() };
    // Real Gram path, per block: `X = B'ᵀ U` (`U` itself for a trivial
    // stabiliser) and `XᵀX` by its lower block triangle (three quarters of
    // the products).
    if let Some(g) = &mut untwisted_gram {
        let vectors = match whole {
            true => vec![std::mem::replace(&mut g.u, DMatrix::zeros(0, 0))],
            false => sparse.iter().map(|b| b.adjoint_times_real(&g.u)).collect(),
        };
        g.grams = vectors
            .into_iter()
            .map(|x| {
                let mut gram = DMatrix::zeros(x.ncols(), x.ncols());
                matmul::add_lower_outer(&mut gram, 1.0, Part::of(&x).t());
                matmul::mirror_lower(&mut gram);
                (gram, x)
            })
            .collect();
    }
    // Complex Gram path with a stabiliser (an orbit the real way does not
    // take: no mirror couples, or a stabiliser not real untwisted or with
    // blocks of type dimension above 1), per block: `Z = Y B` (real and imaginary
    // parts; each column of `B` has at most `|H|` entries) and the block's
    // Gram matrix `ZᴴZ / |H| = Bᴴ (YᴴY / |H|) B`, made from `Z` directly:
    // `Σ_b n_b² d` instead of `n² d` for the whole Gram matrix (half for a
    // stabiliser of two elements).
    let block_grams: Vec<((DMatrix<f64>, DMatrix<f64>), DMatrix<Complex64>)> = match &y {
        Some((ya, yb)) => sparse
            .iter()
            .map(|b| {
                let z = b.times_parts(ya, yb);
                let g = gram(&z.0, &z.1) * Complex64::new(1.0 / hsize, 0.0);
                (z, g)
            })
            .collect(),
        _ => Vec::new(),
    };
    let trace: f64 = match (&untwisted, &untwisted_gram) {
        (Some(c), _) => c.0.trace(),
        (None, Some(g)) => g.grams.iter().map(|(gram, _)| gram.trace()).sum(),
        _ if !block_grams.is_empty() => block_grams.iter().map(|(_, g)| (0..g.nrows()).map(|i| g[(i, i)].re).sum::<f64>()).sum(),
        _ => (0..n).map(|i| x[(i, i)].re).sum(),
    };
    let tol = 1e-12 * trace;
    let mut layer_energy = vec![0.0; lmax];
    let mut tail = 0.0;
    // Per block, per layer (a block's vectors are orthogonal to every other
    // block's: they lie in different isotypic components).
    let mut layer_vectors: Vec<Vec<Vec<DVector<Complex64>>>> = vec![vec![Vec::new(); lmax]; blocks.len()];
    let mut real_layer_vectors: Vec<Vec<Vec<DVector<f64>>>> = vec![vec![Vec::new(); lmax]; blocks.len()];
    // Per block: its eigenvectors, the kept ones by layer, and which were kept.
    let mut decompositions = Vec::with_capacity(blocks.len());
    let mut kept_count = 0;
    // The energy of the eigenvectors not kept: Σ_i (image i's discarded energy).
    let mut left_out = 0.0;
    for (index, b) in blocks.iter().enumerate() {
        let eig = if let (Some((real, s, _)), true) = (&untwisted, whole) {
            untwisted_eigen(real.clone(), s)
        } else if let Some((real, ..)) = &untwisted {
            // In the block's real basis `B'`: eigenvectors `u` of `B'ᵀ C' B'`
            // (real); the vectors are `S (B' u)`, made below.
            real_eigen(sparse[index].compress_real(real))
        } else if let Some(g) = &untwisted_gram {
            real_eigen(g.grams[index].0.clone())
        } else if whole {
            hermitian_eigen(x.clone())
        } else if let Some((_, g)) = block_grams.get(index) {
            hermitian_eigen(g.clone())
        } else {
            hermitian_eigen(sparse[index].compress(&x))
        };
        let mut order: Vec<usize> = (0..eig.eigenvalues.len()).collect();
        order.sort_by(|&i, &j| eig.eigenvalues[j].total_cmp(&eig.eigenvalues[i]));
        let s = b.type_dim;
        let per_layer = r * s * s;
        for (rank, &e) in order.iter().enumerate() {
            let lambda = eig.eigenvalues[e].max(0.0);
            match layer_energy.get_mut(rank / per_layer) {
                Some(slot) => *slot += lambda,
                None => tail += lambda,
            }
        }
        // Keep whole copies (s eigenvectors) with non-negligible energy,
        // grouped by layer: (layer, eigenvector indices).
        let mut groups: Vec<(usize, Vec<usize>)> = Vec::new();
        for (copy, chunk) in order.chunks(s).enumerate() {
            let layer = copy / (r * s);
            if layer >= lmax {
                break;
            }
            let mean = chunk.iter().map(|&e| eig.eigenvalues[e]).sum::<f64>() / s as f64;
            if !(mean > tol) {
                continue;
            }
            match groups.last_mut() {
                Some((l, es)) if *l == layer => es.extend_from_slice(chunk),
                _ => groups.push((layer, chunk.to_vec())),
            }
        }
        kept_count += groups.iter().map(|g| g.1.len()).sum::<usize>();
        let mut kept = vec![false; eig.eigenvalues.len()];
        for &e in groups.iter().flat_map(|g| &g.1) {
            kept[e] = true;
        }
        left_out += (0..kept.len()).filter(|&e| !kept[e]).map(|e| eig.eigenvalues[e].max(0.0)).sum::<f64>();
        decompositions.push((eig, groups, kept));
    }
    for (index, (eig, groups, _)) in decompositions.iter().enumerate() {
        let sparse = sparse.get(index).filter(|_| y.is_none());
        let block_vectors = block_grams.get(index).map(|(z, _)| z);
        // One product per (block, layer): its shape does not depend on how
        // many layers are kept, so the generators for L are bit-identical to
        // the first L for L + 1.
        for (layer, es) in groups {
            if let Some(g) = &untwisted_gram {
                // `Y' a = S (B' (X a))` for real coefficients `a`: one real
                // product in the block's coordinates; `B'` and `S` are
                // applied after orthonormalising.
                let a = eig.untwisted.as_ref().expect("real eigenvectors");
                let z = matmul::mul(1.0, Part::of(&g.grams[index].1), Part::of(&DMatrix::from_fn(a.nrows(), es.len(), |row, c| a[(row, es[c])])));
                for col in z.column_iter() {
                    let norm = col.norm();
                    if norm > 0.0 {
                        real_layer_vectors[index][*layer].push(col.unscale(norm));
                    }
                }
                continue;
            }
            let coeffs = DMatrix::from_fn(eig.eigenvalues.len(), es.len(), |row, c| eig.eigenvectors[(row, es[c])]);
            let u = match (&y, &block_vectors, &sparse) {
                // Gram path: `Y (B c) = (Y B) c`, with `Y B` made once per block.
                (Some(_), Some((za, zb)), _) => product_parts(za, zb, &coeffs),
                (Some((ya, yb)), None, _) => product_parts(ya, yb, &coeffs),
                (None, _, Some(sparse)) => sparse.expand(&coeffs),
                (None, _, None) => coeffs,
            };
            // Untwisted blocks: `S (B' u)`.
            let u = match (&untwisted, sparse) {
                (Some((_, s, _)), Some(_)) => DMatrix::from_fn(d, u.ncols(), |a, c| s[a] * u[(a, c)]),
                _ => u,
            };
            for col in u.column_iter() {
                let norm = col.norm();
                if norm > 0.0 {
                    layer_vectors[index][*layer].push(col / Complex64::new(norm, 0.0));
                }
            }
        }
    }
    // Covariance path: the layer vectors are eigenvectors of one Hermitian
    // matrix (or an orthonormal block basis times them), orthonormal to
    // round-off already. Gram path: `Y a / ||Y a||` loses orthogonality for
    // small eigenvalues, so the layers are orthonormalised, each block's
    // vectors against that block's only (its own space: for two blocks of
    // equal size, half the work of orthonormalising all of them together).
    // Real Gram path: each block's real layers `B' q` (orthonormal: `B'`
    // has orthonormal columns), kept for the per-image energies below.
    let mut real_layers: Vec<DMatrix<f64>> = Vec::new();
    let layers = if let Some(g) = &untwisted_gram {
        let per_block = real_layer_vectors
            .into_iter()
            .enumerate()
            .map(|(index, layers)| {
                let q = orthonormal_layers(layers, g.grams[index].1.nrows(), orbit.rep)?;
                Ok(match sparse.get(index) {
                    Some(b) => q.iter().map(|q| b.expand_real(q)).collect(),
                    None => q,
                })
            })
            .collect::<Result<Vec<_>>>()?;
        real_layers = side_by_side(per_block, lmax, d);
        // Orthonormal real vectors `z` give orthonormal `S z` (`|S| = 1`).
        real_layers.iter().map(|q| DMatrix::from_fn(d, q.ncols(), |a, c| g.s[a] * q[(a, c)])).collect()
    } else if y.is_none() {
        let per_block = layer_vectors.into_iter().map(|layers| layers.into_iter().map(|cols| columns_matrix(&cols, d)).collect()).collect();
        side_by_side(per_block, lmax, d)
    } else {
        let per_block = layer_vectors.into_iter().map(|layers| orthonormal_layers(layers, d, orbit.rep)).collect::<Result<Vec<_>>>()?;
        side_by_side(per_block, lmax, d)
    };
    // Per-image discarded energy with all lmax layers. The images' shares
    // are non-negative and sum to the energy left out, so when that is
    // round-off (every eigenvalue above it kept) each share is zero to
    // that level. Otherwise through the complement (the eigenvectors not
    // kept) when it is the smaller space and known (covariance path), else
    // energy minus the captured part.
    let twist = untwisted.as_ref().map(|u| u.1.clone()).or_else(|| untwisted_gram.as_ref().map(|g| g.s.clone()));
    if left_out <= tol {
        return Ok(OrbitSolution { layer_energy, tail, layers, image_discarded: vec![0.0; m], twist });
    }
    // With the untwisted decomposition every eigenvector `e = S u` (`u`
    // real; `u = B' c` with a stabiliser) is fixed by `J v = D conj(v)`, so the projector onto the kept
    // space commutes with `J`, and `v_{p'} = c J v_p` (`|c| = 1`) loses as
    // much as `v_p`: the couples' first points, counted twice, with the
    // real vectors `u` against `w = Sᴴ v` (one real product, not four).
    if let Some((_, s, primary)) = &untwisted {
        let complement = d - kept_count < kept_count;
        // The chosen real vectors of every block (`B' u` with a stabiliser).
        let mut columns: Vec<DVector<f64>> = Vec::new();
        for (index, (eig, _, kept)) in decompositions.iter().enumerate() {
            let real = eig.untwisted.as_ref().expect("the untwisted decomposition keeps its real eigenvectors");
            let chosen: Vec<usize> = (0..kept.len()).filter(|&e| kept[e] != complement).collect();
            let picked = DMatrix::from_fn(real.nrows(), chosen.len(), |row, c| real[(row, chosen[c])]);
            let vectors = match sparse.get(index) {
                Some(b) => b.expand_real(&picked),
                None => picked,
            };
            columns.extend(vectors.column_iter().map(|c| c.into_owned()));
        }
        let basis = if columns.is_empty() { DMatrix::zeros(d, 0) } else { DMatrix::from_columns(&columns) };
        let discard = if complement { Discard::Complement(basis) } else { Discard::Captured(basis) };
        let image_discarded = per_image_discarded_untwisted(primary, spectra, s, &discard).into_iter().map(|e| 2.0 * e).collect();
        return Ok(OrbitSolution { layer_energy, tail, layers, image_discarded, twist });
    }
    // The real Gram path's vectors are `S z` with `z` real too: the same
    // way, with the real layers as the kept space's basis.
    if let Some(g) = &untwisted_gram {
        let columns: Vec<DVector<f64>> = real_layers.iter().flat_map(|q| q.column_iter().map(|c| c.into_owned())).collect();
        let basis = if columns.is_empty() { DMatrix::zeros(d, 0) } else { DMatrix::from_columns(&columns) };
        let image_discarded = per_image_discarded_untwisted(&g.primary, spectra, &g.s, &Discard::Captured(basis)).into_iter().map(|e| 2.0 * e).collect();
        return Ok(OrbitSolution { layer_energy, tail, layers, image_discarded, twist });
    }
    let discard = if y.is_none() && untwisted_gram.is_none() && d - kept_count < kept_count {
        let mut columns = Vec::with_capacity(d - kept_count);
        for (index, (eig, _, kept)) in decompositions.iter().enumerate() {
            let rest: Vec<usize> = (0..kept.len()).filter(|&e| !kept[e]).collect();
            if rest.is_empty() {
                continue;
            }
            let coeffs = DMatrix::from_fn(eig.eigenvalues.len(), rest.len(), |row, c| eig.eigenvectors[(row, rest[c])]);
            let v = match sparse.get(index) {
                Some(b) => b.expand(&coeffs),
                None => coeffs,
            };
            columns.extend(v.column_iter().map(|c| c.into_owned()));
        }
        Discard::Complement(if columns.is_empty() { DMatrix::zeros(d, 0) } else { DMatrix::from_columns(&columns) })
    } else {
        let columns: Vec<DVector<Complex64>> =
            layers.iter().flat_map(|q| q.column_iter().map(|c| c.into_owned())).collect();
        Discard::Captured(if columns.is_empty() { DMatrix::zeros(d, 0) } else { DMatrix::from_columns(&columns) })
    };
    let image_discarded = per_image_discarded(&point_gathers, spectra, &discard);
    Ok(OrbitSolution { layer_energy, tail, layers, image_discarded, twist })
}

/// Vectors of length `d` as the columns of a matrix (`d x 0` for none).
fn columns_matrix(cols: &[DVector<Complex64>], d: usize) -> DMatrix<Complex64> {
    if cols.is_empty() { DMatrix::zeros(d, 0) } else { DMatrix::from_columns(cols) }
}

/// Each layer's columns from every block, block by block: `per_block[b][l]`
/// holds block `b`'s columns of layer `l` (`d` rows).
fn side_by_side<T: nalgebra::ComplexField>(per_block: Vec<Vec<DMatrix<T>>>, lmax: usize, d: usize) -> Vec<DMatrix<T>> {
    (0..lmax)
        .map(|l| {
            let parts: Vec<&DMatrix<T>> = per_block.iter().map(|layers| &layers[l]).collect();
            let mut out = DMatrix::zeros(d, parts.iter().map(|p| p.ncols()).sum());
            let mut at = 0;
            for p in parts {
                out.columns_mut(at, p.ncols()).copy_from(p);
                at += p.ncols();
            }
            out
        })
        .collect()
}

/// The real Gram path of one orbit: with `u_c` the columns of `U` (see
/// [`untwisted_gram_vectors`]) the untwisted covariance is `C' = U Uᵀ`,
/// and within the stabiliser's real block `b` (basis `B'`, type dimension
/// 1: `B'ᵀ R_h = χ(h) B'ᵀ` with `χ(h) = ±1`) the symmetrised
/// `B'ᵀ (Σ_h R_h C' R_hᵀ / |H|) B'` is `X Xᵀ` with `X = B'ᵀ U`. Its
/// non-zero eigenvalues are those of the real Gram matrix `XᵀX`, and the
/// eigenvector of `X Xᵀ` for an eigenvector `a` of `XᵀX` is `X a` up to
/// its norm.
struct UntwistedGram {
    /// `U` (`d x 2·points·images`), until the blocks' `X` are made from it.
    u: DMatrix<f64>,
    /// `S`, the square root of the couples' twist.
    s: Vec<Complex64>,
    /// The gathers of the couples' first points.
    primary: Vec<Gather>,
    /// Per block, `XᵀX` and `X`.
    grams: Vec<(DMatrix<f64>, DMatrix<f64>)>,
}

/// Whether an orbit on the Gram path takes the real way: its points in
/// mirror couples ([`mirror_halves`]) and its stabiliser trivial, or real
/// in the untwisted frame ([`untwisted_stabiliser`]) with every block of
/// type dimension 1 (the blocks' `X = B'ᵀ U` of [`UntwistedGram`] need
/// `B'ᵀ R_h = ±B'ᵀ`). Returns the couples' first points, `S`, the
/// stabiliser's operators and, with a stabiliser, its real blocks.
#[allow(clippy::type_complexity)]
fn real_gram_couples(
    sym: &Symmetry,
    orbit: &Orbit,
    fibers: &Fibers,
    point_gathers: &[Gather],
) -> Result<Option<(Vec<Gather>, Vec<Complex64>, Vec<Monomial>, Option<Vec<Block>>)>> {
    let Some((primary, d)) = mirror_halves(sym, orbit, fibers, point_gathers) else {
        return Ok(None);
    };
    let s: Vec<Complex64> = d.iter().map(|z| z.sqrt()).collect();
    if orbit.stabiliser.len() <= 1 {
        return Ok(Some((primary, s, Vec::new(), None)));
    }
    let ops = orbit.stabiliser.iter().map(|&h| sym.fiber_unitary(orbit.rep, h)).collect::<Result<Vec<_>>>()?;
    Ok(match untwisted_stabiliser(&ops, &s) {
        Some((_, blocks)) if blocks.iter().all(|b| b.type_dim == 1) => Some((primary, s, ops, Some(blocks))),
        _ => None,
    })
}

/// For a point group holding the half turn `−I` and an orbit whose
/// stabiliser does not, the orbit's points come in mirror couples `p`,
/// `p' = (−I)p`, and for real images the fiber vector of the element
/// `q = (−I) g_p` (a representative of `p'`'s coset) is
/// `v_q = D conj(v_p)` with the diagonal `D_η = phase_q(η) phase_p(η)`
/// (its gather reads `f̂(−ζ) = conj f̂(ζ)` where `p`'s reads `f̂(ζ)`), the
/// same `D` for every couple up to a unimodular constant (which cancels in
/// `v vᴴ`). Then the pooled covariance over the points is
/// `A + D conj(A) Dᴴ` with `A` pooled over one point of each couple: half
/// the products. Returns the gathers of those points and `D`, or `None`
/// when the orbit has no such couples (or, defensively, when the twists of
/// two couples differ by more than a constant).
fn mirror_halves(sym: &Symmetry, orbit: &Orbit, fibers: &Fibers, point_gathers: &[Gather]) -> Option<(Vec<Gather>, Vec<Complex64>)> {
    let minus = sym.ops().iter().position(|o| o.g == [[-1, 0], [0, -1]])?;
    if orbit.stabiliser.contains(&minus) {
        return None;
    }
    let l = sym.lattice();
    let mut primary = Vec::new();
    let mut twist: Option<Vec<Complex64>> = None;
    for (j, &(_, op)) in orbit.points.iter().enumerate() {
        let q = sym.product(minus, op);
        let mirror = l.fiber_of(l.dual_action(&sym.ops()[q].g, orbit.rep));
        let k = orbit.points.iter().position(|&(f, _)| f == mirror)?;
        if k == j {
            return None;
        }
        if j > k {
            continue;
        }
        let gq = fibers.gather(sym, orbit.rep, q);
        let d: Vec<Complex64> = gq.phase.iter().zip(&point_gathers[j].phase).map(|(a, b)| a * b).collect();
        match &twist {
            None => twist = Some(d),
            Some(first) => {
                let c = d[0] / first[0];
                if d.iter().zip(first).any(|(a, b)| (a / b - c).norm() > 1e-9) {
                    return None;
                }
            }
        }
        primary.push(point_gathers[j].clone());
    }
    twist.map(|t| (primary, t))
}

/// Eigenvalues and orthonormal eigenvectors of a Hermitian matrix.
struct Eigen {
    eigenvalues: DVector<f64>,
    eigenvectors: DMatrix<Complex64>,
    /// For [`untwisted_eigen`]: the real eigenvectors `U` (`eigenvectors = S U`).
    untwisted: Option<DMatrix<f64>>,
}

/// The eigen-decomposition of a Hermitian `C`.
fn hermitian_eigen(c: DMatrix<Complex64>) -> Eigen {
    let (eigenvalues, eigenvectors) = eigen::hermitian(c);
    Eigen { eigenvalues, eigenvectors, untwisted: None }
}

/// The eigen-decomposition of a real symmetric matrix, its real
/// eigenvectors kept too (as [`untwisted_eigen`] with `S = I`).
fn real_eigen(real: DMatrix<f64>) -> Eigen {
    let (eigenvalues, vectors) = eigen::symmetric(real);
    Eigen { eigenvalues, eigenvectors: vectors.map(|v| Complex64::new(v, 0.0)), untwisted: Some(vectors) }
}

/// The eigen-decomposition of `C = S C' Sᴴ` from the real symmetric `C'`
/// of [`untwisted_covariance`]: `C' = U Λ Uᵀ` gives `C = (S U) Λ (S U)ᴴ`,
/// about four times less arithmetic than the complex decomposition.
fn untwisted_eigen(real: DMatrix<f64>, s: &[Complex64]) -> Eigen {
    let n = real.nrows();
    let (eigenvalues, real_vectors) = eigen::symmetric(real);
    let eigenvectors = DMatrix::from_fn(n, n, |a, e| s[a] * real_vectors[(a, e)]);
    Eigen { eigenvalues, eigenvectors, untwisted: Some(real_vectors) }
}

/// The stabiliser in the untwisted frame, when it is real there: with
/// `C' = Sᴴ C S` real (see [`untwisted_covariance`]), the symmetrised
/// covariance `Σ_h U_h C U_hᴴ` is `S (Σ_h U'_h C' U'_hᵀ) Sᴴ` for the
/// monomials `U'_h = Sᴴ U_h S`, whose phases `conj(s_a) p_a s_{perm(a)}`
/// may be real (±1): they are for the mirror lines of pmm and p4m in the
/// benchmark workloads, and in the tests' fits for about half the
/// stabilised orbits tried (63 of 114), the others taking the complex way.
/// Then the isotypic blocks of the `U'_h` and the decomposition within
/// each are real too when every block's basis vector is a real vector
/// times a phase (each vector lives on one orbit of `H` on the
/// coordinates), which is checked, the phase divided out. `None` when any of it is not real (to `1e-12`):
/// the complex way is taken instead. With it the orbit's eigenproblem is
/// real (about a quarter of the arithmetic) and each image's discarded
/// energy is measured at half the points in real arithmetic, as for a
/// trivial stabiliser.
fn untwisted_stabiliser(ops: &[Monomial], s: &[Complex64]) -> Option<(Vec<Monomial>, Vec<Block>)> {
    const REAL: f64 = 1e-12;
    let mut real_ops = Vec::with_capacity(ops.len());
    for op in ops {
        let mut phase = Vec::with_capacity(op.phase.len());
        for (a, (&p, &b)) in op.phase.iter().zip(&op.perm).enumerate() {
            let z = s[a].conj() * p * s[b];
            if z.im.abs() > REAL {
                return None;
            }
            phase.push(Complex64::new(z.re.signum(), 0.0));
        }
        real_ops.push(Monomial { perm: op.perm.clone(), phase });
    }
    let mut blocks = isotypic_blocks(s.len(), &real_ops).ok()?;
    for block in &mut blocks {
        if !block.basis.make_real(REAL) {
            return None;
        }
    }
    Some((real_ops, blocks))
}

/// `Σ_h U_h C U_hᵀ` for real monomial `U_h` (phases ±1; see
/// [`symmetrised`]).
fn symmetrised_real(c: &DMatrix<f64>, ops: &[Monomial]) -> DMatrix<f64> {
    let n = c.nrows();
    let mut out = DMatrix::<f64>::zeros(n, n);
    for op in ops {
        for b in 0..n {
            let (pb, cb) = (op.perm[b], op.phase[b].re);
            for a in 0..n {
                out[(a, b)] += op.phase[a].re * c[(op.perm[a], pb)] * cb;
            }
        }
    }
    out
}

/// `C = S C' Sᴴ` for a diagonal `S` (see [`untwisted_covariance`]).
fn retwisted(real: &DMatrix<f64>, s: &[Complex64]) -> DMatrix<Complex64> {
    let n = real.nrows();
    DMatrix::from_fn(n, n, |a, b| s[a] * real[(a, b)] * s[b].conj())
}

/// `Σ_h U_h C U_hᴴ` for monomial `U_h`:
/// `(U C Uᴴ)[a, b] = phase[a] C[perm[a], perm[b]] conj(phase[b])`.
fn symmetrised(c: &DMatrix<Complex64>, ops: &[Monomial]) -> DMatrix<Complex64> {
    let n = c.nrows();
    let mut out = DMatrix::<Complex64>::zeros(n, n);
    for op in ops {
        for b in 0..n {
            let (pb, cb) = (op.perm[b], op.phase[b].conj());
            for a in 0..n {
                out[(a, b)] += op.phase[a] * c[(op.perm[a], pb)] * cb;
            }
        }
    }
    out
}

/// Orthonormalises the kept vectors layer by layer: against all earlier
/// layers together by block classical Gram–Schmidt, run twice when the
/// first pass cancels much of a vector (matrix products; the earlier layers
/// are the same for every `lmax`), then within the layer by Cholesky QR run
/// twice ([`cholesky_qr2`]). The Gram path's `Y v / ||Y v||` loses
/// orthogonality for small eigenvalues. Layer `l` depends only on layers
/// `< l`, so the layers stay nested.
fn orthonormal_layers<T: LayerScalar>(layer_vectors: Vec<Vec<DVector<T>>>, d: usize, rep: [usize; 2]) -> Result<Vec<DMatrix<T>>> {
    let mut layers: Vec<DMatrix<T>> = Vec::with_capacity(layer_vectors.len());
    // All earlier layers side by side: the first `done` columns.
    let mut earlier = T::prepared(d, layer_vectors.iter().map(Vec::len).sum());
    let mut done = 0;
    for cols in layer_vectors {
        if cols.is_empty() {
            layers.push(DMatrix::zeros(d, 0));
            continue;
        }
        let mut v = DMatrix::from_columns(&cols);
        if done > 0 {
            // A second pass only when the first cancelled much of a column
            // (the criterion of Daniel, Gragg, Kaufman and Stewart, 1976):
            // otherwise one pass leaves it orthogonal to round-off.
            let before: Vec<f64> = v.column_iter().map(|c| c.norm()).collect();
            for pass in 0..2 {
                let c = T::adjoint_times(&earlier, done, &v);
                v -= T::times(&earlier, done, &c);
                let cancelled = v.column_iter().zip(&before).any(|(c, &b)| c.norm() < b * std::f64::consts::FRAC_1_SQRT_2);
                if pass == 0 && !cancelled {
                    break;
                }
            }
        }
        let q = cholesky_qr2(v).ok_or_else(|| Error::Internal(format!("fiber {rep:?}: kept vectors are not independent")))?;
        T::store(&mut earlier, done, &q);
        done += q.ncols();
        layers.push(q);
    }
    Ok(layers)
}

/// The orthonormal factor `Q` of `V = Q R` (`R` upper triangular with a
/// positive diagonal: the vectors Gram–Schmidt would give) by Cholesky QR
/// run twice (CholeskyQR2, Fukaya, Nakatsukasa, Yanagisawa and Yamamoto,
/// 2014): `VᴴV = R₁ᴴR₁`, `Q₁ = V R₁⁻¹`, then the same on `Q₁`, which
/// leaves `Q` orthonormal to round-off when `V` is well conditioned. Two
/// small Gram matrices and four products with `V` instead of one
/// vector operation per pair of columns. `R₁`'s diagonal holds the norm
/// of each vector's part orthogonal to those before it (what modified
/// Gram–Schmidt would divide by); `None` when one is below 0.5 (the vectors
/// come in with norm about 1: they are not independent) or the Cholesky
/// factorisation fails.
fn cholesky_qr2<T: LayerScalar>(v: DMatrix<T>) -> Option<DMatrix<T>> {
    let (d, k) = v.shape();
    let mut q = v;
    let mut prepared = T::prepared(d, k);
    for pass in 0..2 {
        T::store(&mut prepared, 0, &q);
        let gram = T::adjoint_times(&prepared, k, &q);
        let l = nalgebra::Cholesky::new(gram)?.unpack();
        if pass == 0 && (0..l.nrows()).any(|j| !(l[(j, j)].real() > 0.5)) {
            return None;
        }
        // R⁻¹ = (L⁻¹)ᴴ with L = Rᴴ the Cholesky factor.
        let inverse = l.solve_lower_triangular(&DMatrix::identity(l.nrows(), l.nrows()))?.adjoint();
        q = T::times(&prepared, k, &inverse);
    }
    Some(q)
}

/// The scalars [`orthonormal_layers`] works in: `Eᴴ V` and `E C` for the
/// first columns of `E` through the blocked real matrix product (complex
/// matrices held as their real and imaginary parts).
trait LayerScalar: nalgebra::ComplexField<RealField = f64> + Copy {
    /// `E` held ready for repeated products.
    type Prepared;
    /// Room for `columns` columns of `d` rows.
    fn prepared(d: usize, columns: usize) -> Self::Prepared;
    /// Sets the columns from `at` on to `q`.
    fn store(e: &mut Self::Prepared, at: usize, q: &DMatrix<Self>);
    /// `E[:, ..cols]ᴴ V`.
    fn adjoint_times(e: &Self::Prepared, cols: usize, v: &DMatrix<Self>) -> DMatrix<Self>;
    /// `E[:, ..cols] C`.
    fn times(e: &Self::Prepared, cols: usize, c: &DMatrix<Self>) -> DMatrix<Self>;
}

impl LayerScalar for f64 {
    type Prepared = DMatrix<f64>;
    fn prepared(d: usize, columns: usize) -> Self::Prepared {
        DMatrix::zeros(d, columns)
    }
    fn store(e: &mut Self::Prepared, at: usize, q: &DMatrix<f64>) {
        e.columns_mut(at, q.ncols()).copy_from(q);
    }
    fn adjoint_times(e: &Self::Prepared, cols: usize, v: &DMatrix<f64>) -> DMatrix<f64> {
        matmul::mul(1.0, Part::of(e).cols(0..cols).t(), Part::of(v))
    }
    fn times(e: &Self::Prepared, cols: usize, c: &DMatrix<f64>) -> DMatrix<f64> {
        matmul::mul(1.0, Part::of(e).cols(0..cols), Part::of(c))
    }
}

impl LayerScalar for Complex64 {
    type Prepared = (DMatrix<f64>, DMatrix<f64>);
    fn prepared(d: usize, columns: usize) -> Self::Prepared {
        (DMatrix::zeros(d, columns), DMatrix::zeros(d, columns))
    }
    fn store(e: &mut Self::Prepared, at: usize, q: &DMatrix<Complex64>) {
        e.0.columns_mut(at, q.ncols()).zip_apply(q, |r, z| *r = z.re);
        e.1.columns_mut(at, q.ncols()).zip_apply(q, |r, z| *r = z.im);
    }
    fn adjoint_times(e: &Self::Prepared, cols: usize, v: &DMatrix<Complex64>) -> DMatrix<Complex64> {
        adjoint_product_of(Part::of(&e.0).cols(0..cols), Part::of(&e.1).cols(0..cols), v)
    }
    fn times(e: &Self::Prepared, cols: usize, c: &DMatrix<Complex64>) -> DMatrix<Complex64> {
        product_of(Part::of(&e.0).cols(0..cols), Part::of(&e.1).cols(0..cols), c)
    }
}

/// How [`per_image_discarded`] measures what the layers leave out.
enum Discard<T: nalgebra::Scalar> {
    /// An orthonormal basis of the kept space: discarded = `||v||² − ||Qᴴv||²`,
    /// or `||v − Q Qᴴ v||²` when that difference is below `1e-6 ||v||²`.
    Captured(DMatrix<T>),
    /// An orthonormal basis of its complement: discarded = `||Rᴴv||²`.
    Complement(DMatrix<T>),
}

impl<T: nalgebra::Scalar> Discard<T> {
    fn basis(&self) -> &DMatrix<T> {
        match self {
            Discard::Captured(q) | Discard::Complement(q) => q,
        }
    }
    /// One vector's discarded energy from its `energy`, the squared norm
    /// `inside` of its coordinates in the basis, and (called only when the
    /// difference has lost its digits) the squared norm of `v − Q Qᴴ v`.
    fn share(&self, energy: f64, inside: f64, residual: impl FnOnce() -> f64) -> f64 {
        match self {
            Discard::Complement(_) => inside,
            Discard::Captured(q) => {
                let left = energy - inside;
                // Nearly all captured: take the residual vector itself.
                if q.ncols() > 0 && left < 1e-6 * energy {
                    residual()
                } else {
                    left.max(0.0)
                }
            }
        }
    }
}

/// Per image `i`, `Σ_p ||v_{p,i} − P v_{p,i}||²` over the orbit's points `p`
/// (each fiber of the orbit once), in spectrum units (divide by `|T|`).
fn per_image_discarded(point_gathers: &[Gather], spectra: &[Vec<Complex64>], discard: &Discard<Complex64>) -> Vec<f64> {
    let m = spectra.len();
    let d = point_gathers.first().map_or(0, |g| g.index.len());
    let mut out = vec![0.0; m];
    let pairs: Vec<(usize, &Gather)> = point_gathers.iter().flat_map(|g| (0..m).map(move |i| (i, g))).collect();
    let basis = discard.basis();
    let basis_parts = (basis.ncols() > 0).then(|| split(basis));
    for chunk in pairs.chunks(POOL_BLOCK) {
        let mut x = DMatrix::<Complex64>::zeros(d, chunk.len());
        for (c, &(i, gather)) in chunk.iter().enumerate() {
            gather.apply_into(&spectra[i], x.column_mut(c).as_mut_slice());
        }
        let projected = basis_parts.as_ref().map(|(a, b)| adjoint_product_parts(a, b, &x));
        for (c, &(i, _)) in chunk.iter().enumerate() {
            let inside = projected.as_ref().map_or(0.0, |p| p.column(c).norm_squared());
            let residual = || (x.column(c) - basis * projected.as_ref().expect("a non-empty basis").column(c)).norm_squared();
            out[i] += discard.share(x.column(c).norm_squared(), inside, residual);
        }
    }
    out
}

/// [`per_image_discarded`] for an untwisted orbit (see
/// [`untwisted_covariance`]) over the given points, with a real basis `U`
/// of the untwisted space: `||(S U)ᴴ v|| = ||Uᵀ w||` for `w = Sᴴ v`, and with
/// `w = P + iQ` that is one real product `Uᵀ [P Q]` per block of vectors.
fn per_image_discarded_untwisted(gathers: &[Gather], spectra: &[Vec<Complex64>], s: &[Complex64], discard: &Discard<f64>) -> Vec<f64> {
    let mut out = vec![0.0; spectra.len()];
    let phases = untwisted_phases(gathers, s);
    let pairs = gather_image_pairs(gathers.len(), spectra.len());
    let basis = discard.basis();
    for chunk in pairs.chunks(POOL_BLOCK) {
        let w = untwisted_block(gathers, &phases, spectra, chunk);
        let projected = (basis.ncols() > 0).then(|| matmul::mul(1.0, Part::of(basis).t(), Part::of(&w)));
        for (c, &(_, i)) in chunk.iter().enumerate() {
            let (re, im) = (w.column(2 * c), w.column(2 * c + 1));
            let inside = projected.as_ref().map_or(0.0, |z| z.column(2 * c).norm_squared() + z.column(2 * c + 1).norm_squared());
            let residual = || {
                let z = projected.as_ref().expect("a non-empty basis");
                (re - basis * z.column(2 * c)).norm_squared() + (im - basis * z.column(2 * c + 1)).norm_squared()
            };
            out[i] += discard.share(re.norm_squared() + im.norm_squared(), inside, residual);
        }
    }
    out
}

/// Columns of pooled fiber vectors per block in [`pooled_covariance`]: bounds
/// the memory of the accumulation independently of the number of images.
const POOL_BLOCK: usize = 512;

/// `Σ_{g,i} v_{g,i} v_{g,i}ᴴ` for the fiber vectors `v_{g,i} = gather_g(f̂_i)`,
/// accumulated over blocks of [`POOL_BLOCK`] vectors without forming the
/// whole `d x (gathers · images)` matrix `Y`: with `Y = A + iB` (real and imaginary parts),
/// `Y Yᴴ = (A Aᵀ + B Bᵀ) + i (B Aᵀ − (B Aᵀ)ᵀ)`, three real matrix products.
pub(crate) fn pooled_covariance(gathers: &[Gather], spectra: &[Vec<Complex64>]) -> DMatrix<Complex64> {
    let d = gathers.first().map_or(0, |g| g.index.len());
    let pairs: Vec<(&Gather, &Vec<Complex64>)> = gathers.iter().flat_map(|g| spectra.iter().map(move |s| (g, s))).collect();
    let mut re = DMatrix::<f64>::zeros(d, d);
    let mut cross = DMatrix::<f64>::zeros(d, d);
    for chunk in pairs.chunks(POOL_BLOCK) {
        let mut a = DMatrix::<f64>::zeros(d, chunk.len());
        let mut b = DMatrix::<f64>::zeros(d, chunk.len());
        for (c, (gather, s)) in chunk.iter().enumerate() {
            for (k, (&i, &p)) in gather.index.iter().zip(&gather.phase).enumerate() {
                let v = p * s[i];
                a[(k, c)] = v.re;
                b[(k, c)] = v.im;
            }
        }
        matmul::into(&mut re, (0, 0), true, 1.0, Part::of(&a), Part::of(&a).t());
        matmul::into(&mut re, (0, 0), true, 1.0, Part::of(&b), Part::of(&b).t());
        matmul::into(&mut cross, (0, 0), true, 1.0, Part::of(&b), Part::of(&a).t());
    }
    DMatrix::from_fn(d, d, |r, c| Complex64::new(re[(r, c)], cross[(r, c)] - cross[(c, r)]))
}

/// The untwisted covariance of an orbit's mirror couples (see
/// [`mirror_halves`]): with `A = Σ v vᴴ` pooled over one point of each
/// couple and all images, the couples' covariance is
/// `C = A + D conj(A) Dᴴ`, and with `S = D^{1/2}` (diagonal, `|S| = 1`,
/// `s` here) `C' = Sᴴ C S = W Wᴴ + conj(W Wᴴ) = 2 Re(W Wᴴ)` for the
/// vectors `w = Sᴴ v`. With `W = P + iQ` that is `2 (P Pᵀ + Q Qᵀ)`: one
/// real matrix product of `[P Q]` with its transpose per block of
/// [`POOL_BLOCK`] vectors, of which only the lower block triangle (rows
/// split in two) is multiplied out — half the products of
/// [`pooled_covariance`] for the same vectors.
pub(crate) fn untwisted_covariance(gathers: &[Gather], spectra: &[Vec<Complex64>], s: &[Complex64]) -> DMatrix<f64> {
    let d = s.len();
    let phases = untwisted_phases(gathers, s);
    let pairs = gather_image_pairs(gathers.len(), spectra.len());
    let mut out = DMatrix::<f64>::zeros(d, d);
    for chunk in pairs.chunks(POOL_BLOCK) {
        let w = untwisted_block(gathers, &phases, spectra, chunk);
        matmul::add_lower_outer(&mut out, 2.0, Part::of(&w));
    }
    matmul::mirror_lower(&mut out);
    out
}

/// The Gram path's vectors for mirror couples (see [`mirror_halves`]):
/// for each couple's first point `p` and image, `v = v_p` and its twin
/// `J v = D conj(v)` (the fiber vector of the other point, up to a
/// unimodular constant) are replaced by `(v + Jv)/√2` and `i(v − Jv)/√2`,
/// a unitary change of columns that keeps `Y Yᴴ` (so the Gram matrix's
/// eigenvalues and the layer vectors `Y a`). Both are fixed by `J`, so they
/// are `S u` with `u` real: `√2 Re(w)` and `−√2 Im(w)` for `w = Sᴴ v`.
/// Returns the real `U` (d x 2·points·images); `UᵀU` is the real Gram
/// matrix and `S (U a)` a layer vector.
fn untwisted_gram_vectors(primary: &[Gather], spectra: &[Vec<Complex64>], s: &[Complex64]) -> DMatrix<f64> {
    let phases = untwisted_phases(primary, s);
    let pairs = gather_image_pairs(primary.len(), spectra.len());
    let mut u = untwisted_block(primary, &phases, spectra, &pairs);
    for (c, mut col) in u.column_iter_mut().enumerate() {
        col *= if c % 2 == 0 { std::f64::consts::SQRT_2 } else { -std::f64::consts::SQRT_2 };
    }
    u
}

/// Every `(gather, image)` pair, gather-major: the columns of the blocks of
/// [`untwisted_block`].
fn gather_image_pairs(gathers: usize, images: usize) -> Vec<(usize, usize)> {
    (0..gathers).flat_map(|g| (0..images).map(move |i| (g, i))).collect()
}

/// Per gather, its phases times `conj(S)`: `w = Sᴴ v` is gathered directly.
fn untwisted_phases(gathers: &[Gather], s: &[Complex64]) -> Vec<Vec<Complex64>> {
    gathers.iter().map(|g| g.phase.iter().zip(s).map(|(p, t)| p * t.conj()).collect()).collect()
}

/// The vectors `w = Sᴴ v` of the `(gather, image)` pairs in `chunk` as real
/// columns: pair `c`'s real part in column `2c`, its imaginary part in `2c + 1`.
fn untwisted_block(gathers: &[Gather], phases: &[Vec<Complex64>], spectra: &[Vec<Complex64>], chunk: &[(usize, usize)]) -> DMatrix<f64> {
    let d = phases.first().map_or(0, |p| p.len());
    let mut w = DMatrix::<f64>::zeros(d, 2 * chunk.len());
    for (c, &(g, i)) in chunk.iter().enumerate() {
        for (k, (&j, &p)) in gathers[g].index.iter().zip(&phases[g]).enumerate() {
            let v = p * spectra[i][j];
            w[(k, 2 * c)] = v.re;
            w[(k, 2 * c + 1)] = v.im;
        }
    }
    w
}

/// The Gram matrix `Yᴴ Y = (AᵀA + BᵀB) + i (AᵀB − (AᵀB)ᵀ)` of `Y = A + iB`, from `(A, B)`.
pub(crate) fn gram(a: &DMatrix<f64>, b: &DMatrix<f64>) -> DMatrix<Complex64> {
    let mut re = matmul::mul(1.0, Part::of(a).t(), Part::of(a));
    matmul::into(&mut re, (0, 0), true, 1.0, Part::of(b).t(), Part::of(b));
    let cross = matmul::mul(1.0, Part::of(a).t(), Part::of(b));
    let n = a.ncols();
    DMatrix::from_fn(n, n, |r, c| Complex64::new(re[(r, c)], cross[(r, c)] - cross[(c, r)]))
}

/// Real and imaginary parts.
pub(crate) fn split(m: &DMatrix<Complex64>) -> (DMatrix<f64>, DMatrix<f64>) {
    (m.map(|z| z.re), m.map(|z| z.im))
}

/// `X Y` for a complex `X = A + iB` given as `(A, B)`, through four real
/// matrix products `(A + iB)(C + iD) = (AC − BD) + i (AD + BC)` (the real
/// product is the blocked, vectorised one).
pub(crate) fn product_parts(a: &DMatrix<f64>, b: &DMatrix<f64>, y: &DMatrix<Complex64>) -> DMatrix<Complex64> {
    product_of(Part::of(a), Part::of(b), y)
}

/// [`product_parts`] for blocks of the parts.
fn product_of(a: Part, b: Part, y: &DMatrix<Complex64>) -> DMatrix<Complex64> {
    let (c, d) = split(y);
    let mut re = matmul::mul(1.0, a.clone(), Part::of(&c));
    matmul::into(&mut re, (0, 0), true, -1.0, b.clone(), Part::of(&d));
    let mut im = matmul::mul(1.0, a, Part::of(&d));
    matmul::into(&mut im, (0, 0), true, 1.0, b, Part::of(&c));
    re.zip_map(&im, Complex64::new)
}

/// `Xᴴ Y` for `X = A + iB` given as `(A, B)` (see [`product_parts`]).
pub(crate) fn adjoint_product_parts(a: &DMatrix<f64>, b: &DMatrix<f64>, y: &DMatrix<Complex64>) -> DMatrix<Complex64> {
    adjoint_product_of(Part::of(a), Part::of(b), y)
}

/// [`adjoint_product_parts`] for blocks of the parts.
fn adjoint_product_of(a: Part, b: Part, y: &DMatrix<Complex64>) -> DMatrix<Complex64> {
    let (c, d) = split(y);
    let mut re = matmul::mul(1.0, a.clone().t(), Part::of(&c));
    matmul::into(&mut re, (0, 0), true, 1.0, b.clone().t(), Part::of(&d));
    let mut im = matmul::mul(1.0, a.t(), Part::of(&d));
    matmul::into(&mut im, (0, 0), true, -1.0, b.t(), Part::of(&c));
    re.zip_map(&im, Complex64::new)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::prng::SplitMix64;

    fn unimodular(rng: &mut SplitMix64) -> Complex64 {
        Complex64::from_polar(1.0, rng.between(-std::f64::consts::PI, std::f64::consts::PI))
    }

    /// A stabiliser that is real untwisted: `U_h = S M_h Sᴴ` for real
    /// monomials `M_h` (a reflection with signs, on six coordinates of which
    /// two it fixes, one with the sign −1) and a random unimodular `S`.
    /// [`untwisted_stabiliser`] finds the `M_h` back with their signs, real
    /// block bases that are eigenvectors of `M` (±1), and the symmetrised
    /// covariance made in real arithmetic is the complex one untwisted;
    /// a phase that is not real after untwisting gives `None`.
    #[test]
    fn untwisted_stabiliser_is_the_complex_one_untwisted() {
        let mut rng = SplitMix64(41);
        let n = 6;
        let perm = vec![1, 0, 3, 2, 4, 5];
        let signs = [1.0, 1.0, -1.0, -1.0, 1.0, -1.0];
        let identity = Monomial { perm: (0..n).collect(), phase: vec![Complex64::new(1.0, 0.0); n] };
        let m = Monomial { perm: perm.clone(), phase: signs.iter().map(|&v| Complex64::new(v, 0.0)).collect() };
        let s: Vec<Complex64> = (0..n).map(|_| unimodular(&mut rng)).collect();
        let twist = |op: &Monomial| Monomial {
            perm: op.perm.clone(),
            phase: (0..n).map(|a| s[a] * op.phase[a] * s[op.perm[a]].conj()).collect(),
        };
        let ops = vec![twist(&identity), twist(&m)];
        let (real_ops, blocks) = untwisted_stabiliser(&ops, &s).expect("real untwisted");
        assert_eq!(real_ops, vec![identity.clone(), m.clone()]);
        assert_eq!(blocks.iter().map(|b| b.basis.dim()).sum::<usize>(), n);
        let dense_m = m.to_dense();
        for b in &blocks {
            let basis = b.basis.to_dense();
            assert!(basis.iter().all(|z| z.im == 0.0));
            let image = &dense_m * &basis;
            let sign = if (&image - &basis).norm() < 1e-12 { 1.0 } else { -1.0 };
            assert!((&image - &basis * Complex64::new(sign, 0.0)).norm() < 1e-12, "a block mixes the signs of M");
        }
        let a = DMatrix::from_fn(n, n + 2, |_, _| rng.normal());
        let real = &a * a.transpose();
        let complex = symmetrised(&retwisted(&real, &s), &ops);
        let untwisted = retwisted(&symmetrised_real(&real, &real_ops), &s);
        assert!((complex - untwisted).norm() < 1e-12 * real.norm());
        let mut not_real = ops.clone();
        not_real[1].phase[4] *= Complex64::new(0.0, 1.0);
        assert!(untwisted_stabiliser(&not_real, &s).is_none());
    }

    /// The untwisted covariance against its definition, formed the slow way:
    /// `A = Σ v vᴴ` over every gather and spectrum, `C = A + D conj(A) Dᴴ`
    /// with `D = S²`, and `C' = Sᴴ C S` entry by entry. Odd and even `d`
    /// (the block split), more vectors than one pooling block.
    #[test]
    fn untwisted_covariance_matches_its_definition() {
        let mut rng = SplitMix64(7);
        for (d, len, gathers, images) in [(1, 3, 2, 2), (7, 20, 3, 5), (12, 40, 2, 300)] {
            let spectra: Vec<Vec<Complex64>> =
                (0..images).map(|_| (0..len).map(|_| Complex64::new(rng.normal(), rng.normal())).collect()).collect();
            let gathers: Vec<Gather> = (0..gathers)
                .map(|_| Gather {
                    index: (0..d).map(|_| (rng.next_u64() % len as u64) as usize).collect(),
                    phase: (0..d).map(|_| unimodular(&mut rng)).collect(),
                })
                .collect();
            let s: Vec<Complex64> = (0..d).map(|_| unimodular(&mut rng)).collect();
            let mut a = DMatrix::<Complex64>::zeros(d, d);
            for g in &gathers {
                for sp in &spectra {
                    let v = DVector::from_vec(g.apply(sp));
                    a += &v * v.adjoint();
                }
            }
            let fast = untwisted_covariance(&gathers, &spectra, &s);
            let scale = a.iter().fold(0.0f64, |m, z| m.max(z.norm()));
            for r in 0..d {
                for c in 0..d {
                    let (dr, dc) = (s[r] * s[r], s[c] * s[c]);
                    let full = a[(r, c)] + dr * a[(r, c)].conj() * dc.conj();
                    let slow = s[r].conj() * full * s[c];
                    assert!(slow.im.abs() <= 1e-12 * scale, "d = {d}: C' is not real at ({r}, {c})");
                    assert!((fast[(r, c)] - slow.re).abs() <= 1e-12 * scale, "d = {d}: ({r}, {c}): {} vs {}", fast[(r, c)], slow.re);
                }
            }
        }
    }
}

#[cfg(test)]
mod frame_tests {
    use super::*;
    use crate::prng::SplitMix64;
    use crate::spectrum::fft2;

    /// The direct read equals the transform of the shifted copy, bit for bit.
    #[test]
    fn group_frame_spectrum_is_the_spectrum_of_the_shifted_image() {
        let mut rng = SplitMix64(3);
        let img = Image::new(6, 10, (0..60).map(|_| rng.normal()).collect());
        for origin in [[0, 0], [1, 0], [0, 3], [5, 9], [2, 7]] {
            assert_eq!(group_frame_spectrum(&img, origin), fft2(&to_group_frame(&img, origin)), "origin {origin:?}");
        }
    }

    /// Two at a time, each image's spectrum is the one it has alone (to
    /// round-off): odd and even counts, an origin.
    #[test]
    fn group_frame_spectra_two_at_a_time_are_each_ones_own() {
        let mut rng = SplitMix64(4);
        let images: Vec<Image> = (0..3).map(|_| Image::new(6, 10, (0..60).map(|_| rng.normal()).collect())).collect();
        for count in 1..=3 {
            let together = group_frame_spectra(&images[..count], [2, 7]);
            assert_eq!(together.len(), count);
            for (img, got) in images.iter().zip(&together) {
                let want = group_frame_spectrum(img, [2, 7]);
                let scale = want.iter().map(|z| z.norm()).fold(0.0, f64::max);
                let worst = got.iter().zip(&want).map(|(a, b)| (a - b).norm()).fold(0.0, f64::max);
                assert!(worst <= 1e-13 * scale, "{count} images: off by {worst}");
            }
        }
    }
}

#[cfg(test)]
mod layer_tests {
    use super::*;
    use crate::prng::SplitMix64;

    /// Two layers of vectors that are orthonormal up to errors of 1e-4
    /// (as the Gram path's `Y a / ||Y a||` are, more or less): the result
    /// must be orthonormal to round-off, across and within layers, and each
    /// vector must move by no more than about the error.
    fn check<T: LayerScalar>(make: impl Fn(&mut SplitMix64) -> T) {
        let mut rng = SplitMix64(11);
        let (d, delta) = (12, 1e-4);
        let exact = DMatrix::<T>::from_fn(d, 5, |_, _| make(&mut rng)).qr().q();
        let inputs: Vec<DVector<T>> = (0..5)
            .map(|k| (exact.column(k) + DVector::<T>::from_fn(d, |_, _| make(&mut rng)).scale(delta)).normalize())
            .collect();
        let layers = orthonormal_layers(vec![inputs[..3].to_vec(), inputs[3..].to_vec()], d, [0, 0]).unwrap();
        let q = DMatrix::from_columns(&layers.iter().flat_map(|l| l.column_iter().map(|c| c.into_owned())).collect::<Vec<_>>());
        let gram = q.adjoint() * &q;
        for r in 0..gram.nrows() {
            for c in 0..gram.ncols() {
                let want = T::from_real(if r == c { 1.0 } else { 0.0 });
                assert!((gram[(r, c)] - want).modulus() < 1e-13, "QᴴQ[{r},{c}] = {:?}", gram[(r, c)]);
            }
        }
        for (k, v) in inputs.iter().enumerate() {
            let moved = (q.column(k) - v).norm();
            assert!(moved < 50.0 * delta, "vector {k} moved by {moved}");
        }
    }

    #[test]
    fn orthonormal_layers_correct_small_errors_real_and_complex() {
        check(|rng| rng.normal());
        check(|rng| Complex64::new(rng.normal(), rng.normal()));
    }

    /// [`cholesky_qr2`] against nalgebra's Householder QR (the slow obvious
    /// reference; the factor whose `R` has a positive diagonal is unique, so
    /// Householder's columns are scaled by the phase of `R`'s diagonal), on
    /// unit vectors far from orthogonal; a vector whose part orthogonal to
    /// the others is below 0.5 is refused.
    fn check_qr<T: LayerScalar>(make: impl Fn(&mut SplitMix64) -> T) {
        let mut rng = SplitMix64(23);
        let (d, k) = (40, 4);
        let common = DVector::<T>::from_fn(d, |_, _| make(&mut rng));
        let v = DMatrix::<T>::from_fn(d, k, |r, _| common[r].scale(0.5) + make(&mut rng));
        let v = DMatrix::from_columns(&v.column_iter().map(|c| c.normalize()).collect::<Vec<_>>());
        let qr = v.clone().qr();
        let (reference, r) = (qr.q(), qr.r());
        let q = cholesky_qr2(v.clone()).expect("independent vectors");
        for j in 0..k {
            let phase = r[(j, j)] / T::from_real(r[(j, j)].modulus());
            let err = (q.column(j) - reference.column(j) * phase).norm();
            assert!(err < 1e-12, "column {j}: {err}");
        }
        let mut dependent = v.clone();
        let mixed = (v.column(0) + v.column(1).scale(0.1)).normalize();
        dependent.set_column(3, &mixed);
        assert!(cholesky_qr2(dependent).is_none(), "a dependent vector was kept");
    }

    #[test]
    fn cholesky_qr2_gives_the_qr_factor_real_and_complex() {
        check_qr(|rng| rng.normal());
        check_qr(|rng| Complex64::new(rng.normal(), rng.normal()));
    }
}
