//! The dense finite-group reference (MATH.md §3), written here independently
//! of the Fourier-fiber code: Γ as explicit pixel permutations, the pooled
//! covariance `C = Σ_γ Σ_i (π(γ)f_i)(π(γ)f_i)ᵀ`, isotypic components from a
//! random central element with complex weights, multiplicities from
//! characters (Serre, *Linear Representations of Finite Groups*, §2), and
//! the optimum keeping the top `L (dim ρ)²` eigenvalues per component.
//! Every one of the 17 plane groups, several lattices, `L = 1, 2, 3`.

use nalgebra::{DMatrix, DVector};
use orbitspan_core::fiber::Symmetry;
use orbitspan_core::fit::{fit_with_path, FiberPath};
use orbitspan_core::plane_group::{GroupSymbol, PlaneGroup};
use orbitspan_core::{FitSettings, Image, Silent, Stack};

#[path = "support/dense.rs"]
mod dense;
use dense::{act, dense_errors, group_permutations};

struct Rng(u64);
impl Rng {
    fn next(&mut self) -> f64 {
        self.0 ^= self.0 << 13;
        self.0 ^= self.0 >> 7;
        self.0 ^= self.0 << 17;
        (self.0 >> 11) as f64 / (1u64 << 53) as f64 * 2.0 - 1.0
    }
    fn image(&mut self, n: [usize; 2]) -> Image {
        Image::new(n[0], n[1], (0..n[0] * n[1]).map(|_| self.next()).collect())
    }
}

/// Per-image errors of projecting the stack onto the span of `vectors`
/// (columns), and the eigenvalues of `V Vᵀ`.
fn span_error(vectors: &DMatrix<f64>, images: &[Image]) -> (Vec<f64>, Vec<f64>) {
    let s = vectors * vectors.transpose();
    let eig = s.clone().symmetric_eigen();
    let top = eig.eigenvalues.iter().fold(0.0f64, |m, v| m.max(*v));
    let mut errors = Vec::with_capacity(images.len());
    for img in images {
        let f = DVector::from_column_slice(&img.pixels);
        let mut captured = 0.0;
        for (k, &lam) in eig.eigenvalues.iter().enumerate() {
            if lam > 1e-9 * top.max(1e-300) {
                let c = eig.eigenvectors.column(k).dot(&f);
                captured += c * c;
            }
        }
        errors.push(f.norm_squared() - captured);
    }
    (errors, eig.eigenvalues.iter().copied().collect())
}

fn orbit_vectors(perms: &[Vec<usize>], gens: &[Image]) -> DMatrix<f64> {
    let n = gens[0].pixels.len();
    let mut cols = Vec::new();
    for g in gens {
        for p in perms {
            cols.push(act(p, &g.pixels));
        }
    }
    if cols.is_empty() {
        return DMatrix::zeros(n, 0);
    }
    DMatrix::from_columns(&cols)
}

struct Case {
    symbol: GroupSymbol,
    n: [usize; 2],
    cell: [usize; 2],
}

fn cases() -> Vec<Case> {
    use GroupSymbol::*;
    let mut out = Vec::new();
    for symbol in GroupSymbol::ALL {
        let shapes: Vec<([usize; 2], [usize; 2])> = match symbol {
            P1 | P2 => vec![([6, 8], [3, 4]), ([8, 6], [2, 2]), ([5, 4], [5, 4])],
            Pm | Pmm => vec![([6, 8], [3, 4]), ([8, 4], [4, 2])],
            Pg | Pmg | Pgg => vec![([8, 8], [4, 4]), ([6, 8], [2, 4]), ([4, 2], [2, 2])],
            Cm | Cmm => vec![([8, 8], [4, 4]), ([12, 8], [4, 8])],
            P4 | P4m | P4g => vec![([8, 8], [4, 4]), ([12, 12], [6, 6]), ([6, 6], [2, 2])],
            P3 | P3m1 | P31m | P6 | P6m => vec![([6, 6], [3, 3]), ([12, 12], [4, 4]), ([6, 6], [2, 2])],
        };
        for (n, cell) in shapes {
            out.push(Case { symbol, n, cell });
        }
    }
    out
}

fn settings(symbol: GroupSymbol, cell: [usize; 2], l: usize) -> FitSettings {
    FitSettings {
        group: PlaneGroup::standard(symbol),
        cell_rows: cell[0],
        cell_cols: cell[1],
        origin: [0, 0],
        generators: l,
        band: None,
        lattice_coords: symbol.is_hexagonal(),
    }
}

/// Γ as pixel permutations for a group on a torus with a cell.
fn permutations(symbol: GroupSymbol, n: [usize; 2], cell: [usize; 2]) -> Vec<Vec<usize>> {
    let group = PlaneGroup::standard(symbol);
    group_permutations(&Symmetry::new(n, cell, &group).unwrap())
}

fn stack_of(images: &[Image]) -> Stack {
    Stack::new(images.iter().enumerate().map(|(i, im)| (format!("img{i}"), im.clone())).collect()).unwrap()
}

#[test]
fn fiber_fit_matches_dense_reference_for_all_17_groups() {
    let mut rng = Rng(0x1234_5678);
    let mut summary = Vec::new();
    for case in cases() {
        let group = PlaneGroup::standard(case.symbol);
        let sym = Symmetry::new(case.n, case.cell, &group).unwrap();
        let perms = group_permutations(&sym);
        // Γ really is a group of |Λ||G| distinct permutations (closure checked on pairs).
        assert_eq!(perms.len(), sym.group_size());
        let set: std::collections::HashSet<&Vec<usize>> = perms.iter().collect();
        assert_eq!(set.len(), perms.len(), "{:?}: repeated elements", case.symbol);
        for a in perms.iter().step_by(7) {
            for b in perms.iter().step_by(5) {
                let comp: Vec<usize> = (0..a.len()).map(|x| a[b[x]]).collect();
                assert!(set.contains(&comp), "{:?}: not closed", case.symbol);
            }
        }
        let d = sym.lattice().fiber_len();
        let lmax = 3.min(d);
        let images: Vec<Image> = (0..3).map(|_| rng.image(case.n)).collect();
        let stack = stack_of(&images);
        let dense = dense_errors(&perms, &images, lmax);
        let total: f64 = images.iter().map(Image::energy).sum();
        let mut worst = 0.0f64;
        let mut previous_gens: Option<Vec<Image>> = None;
        for l in 1..=lmax {
            let fit = fit_with_path(&stack, &settings(case.symbol, case.cell, l), FiberPath::Auto, &mut Silent).unwrap();
            let curve: Vec<f64> = fit.report.error_curve.iter().map(|p| p.error).collect();
            for k in 0..l {
                // Relative to the error itself, or to 1e-3 of the total energy when the
                // error is smaller still (an error of ~1e-15 has no relative digits).
                let rel = (curve[k] - dense[k]).abs() / dense[k].max(1e-3 * total);
                worst = worst.max(rel);
                assert!(rel < 1e-9, "{:?} {:?} cell {:?} L={}: fiber {} dense {}", case.symbol, case.n, case.cell, k + 1, curve[k], dense[k]);
            }
            // The L generators really achieve it: dense projection onto their Γ-orbit span.
            let gens = fit.model.generators().to_vec();
            let vectors = orbit_vectors(&perms, &gens);
            let (per_image, frame_eigs) = span_error(&vectors, &images);
            let err: f64 = per_image.iter().sum();
            assert!(
                (err - curve[l - 1]).abs() <= 1e-9 * curve[l - 1].max(1e-3 * total),
                "{:?} L={l}: orbit span error {err} vs reported {}",
                case.symbol,
                curve[l - 1]
            );
            // Parseval: the frame operator's eigenvalues are 0 or 1.
            for v in frame_eigs {
                assert!(v.abs() < 1e-9 || (v - 1.0).abs() < 1e-9, "{:?} L={l}: frame eigenvalue {v}", case.symbol);
            }
            // ||φ_l||² |Γ| = dim D_l, and realness.
            for info in &fit.report.generators {
                let lhs = info.norm_squared * sym.group_size() as f64;
                assert!((lhs - info.layer_dimension as f64).abs() < 1e-9 * lhs.max(1.0), "{:?}: {lhs} vs {}", case.symbol, info.layer_dimension);
                assert!(info.imaginary_part < 1e-9, "{:?}: imaginary part {}", case.symbol, info.imaginary_part);
            }
            // Σ residual energies = reported error; each image's error equals
            // the dense projection's and the model's frame projection's.
            let sum: f64 = fit.report.images.iter().map(|e| e.error).sum();
            assert!((sum - curve[l - 1]).abs() <= 1e-9 * total, "{:?}: residuals {sum} vs {}", case.symbol, curve[l - 1]);
            let applied = fit.model.evaluate(&stack, &mut Silent).unwrap();
            for ((e, dense_e), a) in fit.report.images.iter().zip(&per_image).zip(&applied) {
                assert!((e.error - dense_e).abs() <= 1e-9 * total, "{:?} L={l}: image error {} vs dense {dense_e}", case.symbol, e.error);
                assert!((e.error - a.error).abs() <= 1e-9 * total, "{:?} L={l}: image error {} vs model {}", case.symbol, e.error, a.error);
            }
            // Nested: generators for L are bit-identical to the first L for L+1.
            if let Some(prev) = &previous_gens {
                for (a, b) in prev.iter().zip(&gens) {
                    assert_eq!(a.pixels, b.pixels, "{:?}: generators not nested", case.symbol);
                }
            }
            previous_gens = Some(gens);
            // E(L) non-increasing.
            for k in 1..l {
                assert!(curve[k] <= curve[k - 1] + 1e-12 * total);
            }
        }
        summary.push(format!("{:>5} {:?} cell {:?}: max rel diff {:.2e}", case.symbol.short(), case.n, case.cell, worst));
    }
    println!("{}", summary.join("\n"));
}

#[test]
fn gram_and_covariance_paths_agree() {
    let mut rng = Rng(99);
    for (symbol, n, cell, m) in [
        (GroupSymbol::P4m, [8, 8], [4, 4], 1),
        (GroupSymbol::Pgg, [8, 8], [4, 4], 2),
        (GroupSymbol::Cmm, [8, 8], [4, 4], 1),
        (GroupSymbol::P6m, [12, 12], [4, 4], 1),
        (GroupSymbol::Pg, [4, 4], [2, 2], 5),
        // Larger tori: orbits with a trivial stabiliser, where the
        // covariance path pools half of each mirror couple and, for the
        // groups with glides (pmg, pgg, p4g), untwists a non-trivial phase
        // before a real eigen-decomposition (fit::untwisted_covariance,
        // fit::untwisted_eigen; per-image errors from half the points).
        (GroupSymbol::Pmg, [24, 24], [4, 4], 2),
        (GroupSymbol::Pgg, [24, 24], [4, 4], 2),
        (GroupSymbol::P4g, [24, 24], [4, 4], 2),
        (GroupSymbol::Pmm, [20, 16], [4, 4], 2),
        (GroupSymbol::P2, [15, 15], [3, 3], 1),
    ] {
        let images: Vec<Image> = (0..m).map(|_| rng.image(n)).collect();
        let stack = stack_of(&images);
        let s = settings(symbol, cell, 3.min(cell[0] * cell[1] / if symbol.is_centred() { 2 } else { 1 }));
        let a = fit_with_path(&stack, &s, FiberPath::Covariance, &mut Silent).unwrap();
        let b = fit_with_path(&stack, &s, FiberPath::Gram, &mut Silent).unwrap();
        for (p, q) in a.report.error_curve.iter().zip(&b.report.error_curve) {
            assert!((p.error - q.error).abs() < 1e-10 * a.report.total_energy, "{symbol:?}: {} vs {}", p.error, q.error);
        }
        for (p, q) in a.report.images.iter().zip(&b.report.images) {
            assert!((p.error - q.error).abs() < 1e-10 * p.energy, "{symbol:?} {}: {} vs {}", p.file, p.error, q.error);
        }
        for (g, h) in a.model.generators().iter().zip(b.model.generators()) {
            let diff = g.pixels.iter().zip(&h.pixels).map(|(x, y)| (x - y).abs()).fold(0.0, f64::max);
            assert!(diff < 1e-8, "{symbol:?}: generators differ by {diff}");
        }
    }
}

#[test]
fn no_random_generators_do_better() {
    let mut rng = Rng(4242);
    for (symbol, n, cell) in [
        (GroupSymbol::P1, [6, 6], [3, 3]),
        (GroupSymbol::Pg, [8, 4], [4, 2]),
        (GroupSymbol::P4m, [8, 8], [4, 4]),
        (GroupSymbol::P3m1, [6, 6], [3, 3]),
    ] {
        let perms = permutations(symbol, n, cell);
        let images: Vec<Image> = (0..3).map(|_| rng.image(n)).collect();
        for l in 1..=2 {
            let fit = fit_with_path(&stack_of(&images), &settings(symbol, cell, l), FiberPath::Auto, &mut Silent).unwrap();
            let best = fit.report.error_curve[l - 1].error;
            for _ in 0..150 {
                let gens: Vec<Image> = (0..l).map(|_| rng.image(n)).collect();
                let err: f64 = span_error(&orbit_vectors(&perms, &gens), &images).0.iter().sum();
                assert!(err >= best - 1e-9 * best, "{symbol:?} L={l}: random {err} beat optimum {best}");
            }
        }
    }
}

#[test]
fn image_order_does_not_change_the_generators() {
    let mut rng = Rng(77);
    let images: Vec<Image> = (0..4).map(|_| rng.image([8, 8])).collect();
    let mut reversed = images.clone();
    reversed.reverse();
    let s = settings(GroupSymbol::P4g, [4, 4], 3);
    let a = fit_with_path(&stack_of(&images), &s, FiberPath::Auto, &mut Silent).unwrap();
    let b = fit_with_path(&stack_of(&reversed), &s, FiberPath::Auto, &mut Silent).unwrap();
    for (g, h) in a.model.generators().iter().zip(b.model.generators()) {
        let diff = g.pixels.iter().zip(&h.pixels).map(|(x, y)| (x - y).abs()).fold(0.0, f64::max);
        assert!(diff < 1e-9, "generators differ by {diff}");
    }
}

#[test]
fn hexagonal_fit_on_resampled_images_matches_dense_reference() {
    // Images with a hexagonal lattice at 19° to the pixels, resampled onto a
    // small lattice-coordinate grid (2 x 2 cells of 3 x 3 samples), then
    // fitted with each hexagonal group: fiber method vs dense reference.
    use orbitspan_core::resample::LatticeGrid;
    let (len, ang) = (7.4f64, 19f64.to_radians());
    let a1 = [len * ang.cos(), len * ang.sin()];
    let a2 = [len * (ang + std::f64::consts::FRAC_PI_3).cos(), len * (ang + std::f64::consts::FRAC_PI_3).sin()];
    let mut rng = Rng(31);
    let grid = LatticeGrid::fit_inside(24, 24, [a1, a2], Some([3, 3]), true, false).unwrap();
    let grid = LatticeGrid { cells: [2, 2], ..grid };
    let images: Vec<Image> = (0..3).map(|_| grid.to_lattice(&rng.image([24, 24]))).collect();
    assert_eq!([images[0].height, images[0].width], [6, 6]);
    for symbol in [GroupSymbol::P3, GroupSymbol::P3m1, GroupSymbol::P31m, GroupSymbol::P6, GroupSymbol::P6m] {
        let sym = Symmetry::new([6, 6], [3, 3], &PlaneGroup::standard(symbol)).unwrap();
        let perms = group_permutations(&sym);
        let dense = dense_errors(&perms, &images, 3);
        let fit = fit_with_path(&stack_of(&images), &settings(symbol, [3, 3], 3), FiberPath::Auto, &mut Silent).unwrap();
        let total: f64 = images.iter().map(Image::energy).sum();
        for (p, d) in fit.report.error_curve.iter().zip(&dense) {
            assert!((p.error - d).abs() <= 1e-9 * d.max(1e-3 * total), "{symbol:?}: {} vs {d}", p.error);
        }
    }
}

/// Near-exact fits: each image lies in the Γ-orbit span of one generator up
/// to noise of 1e-4, so what the fit leaves out is about 1e-8 of the energy.
/// Each image's reported error must still carry its own digits (relative
/// 1e-9 of itself; about 1e-11 is seen), which `energy − captured` cannot
/// give at that size (about 1e-6 of itself); the
/// reference is the residual vector `f − P f` itself, formed densely from the
/// fitted generators' Γ-orbit span. Groups with and without mirror couples
/// (the real untwisted path and the complex one).
#[test]
fn near_exact_fits_report_per_image_errors_to_their_own_digits() {
    let mut rng = Rng(0xfeed_f00d);
    for (symbol, n, cell) in [
        (GroupSymbol::Pmm, [16, 16], [4, 4]),
        (GroupSymbol::P4, [16, 16], [4, 4]),
        (GroupSymbol::P1, [12, 12], [4, 4]),
        (GroupSymbol::Pg, [16, 12], [4, 4]),
        (GroupSymbol::P6, [12, 12], [4, 4]),
    ] {
        let perms = permutations(symbol, n, cell);
        let g = rng.image(n);
        let images: Vec<Image> = (0..3)
            .map(|_| {
                let mut f = vec![0.0; n[0] * n[1]];
                for p in &perms {
                    let w = rng.next();
                    for (x, v) in act(p, &g.pixels).iter().enumerate() {
                        f[x] += w * v;
                    }
                }
                Image::new(n[0], n[1], f.iter().map(|v| v + 1e-4 * rng.next()).collect())
            })
            .collect();
        let stack = stack_of(&images);
        let fit = fit_with_path(&stack, &settings(symbol, cell, 1), FiberPath::Auto, &mut Silent).unwrap();
        // An orthonormal basis of the generators' Γ-orbit span.
        let vectors = orbit_vectors(&perms, fit.model.generators());
        let eig = (&vectors * vectors.transpose()).symmetric_eigen();
        let top = eig.eigenvalues.iter().fold(0.0f64, |m, v| m.max(*v));
        let basis: Vec<DVector<f64>> = (0..eig.eigenvalues.len())
            .filter(|&k| eig.eigenvalues[k] > 1e-9 * top)
            .map(|k| eig.eigenvectors.column(k).into_owned())
            .collect();
        for (img, reported) in images.iter().zip(&fit.report.images) {
            let f = DVector::from_column_slice(&img.pixels);
            let mut r = f.clone();
            for e in &basis {
                r -= e * e.dot(&f);
            }
            let reference = r.norm_squared();
            assert!(reference < 1e-6 * img.energy(), "{symbol:?}: the image is not near the span ({reference} of {})", img.energy());
            assert!(
                (reported.error - reference).abs() <= 1e-9 * reference,
                "{symbol:?}: image error {} vs residual vector {reference}",
                reported.error
            );
        }
    }
}

/// The Gram path on ill-conditioned data: each image is one strong pattern
/// plus a part 1e-5 as strong, so the later layers come from eigenvalues
/// about 1e-10 of the first, where `Y a / ||Y a||` is least accurate. The
/// frame must still be Parseval (frame eigenvalues 0 or 1) and the curve
/// the covariance path's. Groups with mirror couples (real arithmetic) and
/// without (complex). `orthonormal_layers` itself is unit-tested on
/// perturbed input.
#[test]
fn gram_path_layers_stay_orthonormal_for_tiny_eigenvalues() {
    const WEAK: f64 = 1e-5;
    let mut rng = Rng(0x0dd_ba11);
    for (symbol, n, cell) in [(GroupSymbol::Pmm, [16, 16], [4, 4]), (GroupSymbol::P1, [12, 12], [4, 4]), (GroupSymbol::P4, [16, 16], [4, 4])] {
        let perms = permutations(symbol, n, cell);
        let strong = rng.image(n);
        let images: Vec<Image> = (0..2)
            .map(|_| {
                let weak = rng.image(n);
                Image::new(n[0], n[1], strong.pixels.iter().zip(&weak.pixels).map(|(s, w)| s + WEAK * w).collect())
            })
            .collect();
        let stack = stack_of(&images);
        let s = settings(symbol, cell, 3);
        let gram = fit_with_path(&stack, &s, FiberPath::Gram, &mut Silent).unwrap();
        let cov = fit_with_path(&stack, &s, FiberPath::Covariance, &mut Silent).unwrap();
        let total: f64 = images.iter().map(Image::energy).sum();
        for (p, q) in gram.report.error_curve.iter().zip(&cov.report.error_curve) {
            assert!((p.error - q.error).abs() <= 1e-12 * total, "{symbol:?}: Gram {} vs covariance {}", p.error, q.error);
        }
        let vectors = orbit_vectors(&perms, gram.model.generators());
        let (_, frame_eigs) = span_error(&vectors, &images);
        for v in frame_eigs {
            assert!(v.abs() < 1e-9 || (v - 1.0).abs() < 1e-9, "{symbol:?}: frame eigenvalue {v}");
        }
    }
}
