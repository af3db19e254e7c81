//! Real Parseval generators and the frame projection (MATH.md §5, §5b).
//!
//! Layer `D_l` (the copies generator `l` adds, see [`crate::fit`]) is a
//! Γ-invariant space of length one. For a fixed pseudo-random real image `e`,
//! `ψ_l = P_{D_l} e` is (generically) a cyclic vector of `D_l`, and the polar
//! factor `φ_l = S_ψ^{−1/2} ψ_l`, with `S_ψ = Σ_γ π(γ)ψ (π(γ)ψ)ᵀ` the frame
//! operator, is a Parseval generator: `Σ_γ π(γ)φ_l (π(γ)φ_l)ᵀ = P_{D_l}`.
//! Hence the Γ-orbit of `φ_1..φ_L` is a Parseval frame of `V(L)`, generators
//! for `L` are the first `L` for `L+1`, `||φ_l||² |Γ| = dim D_l`, and `φ_l`
//! is real because `P_{D_l}` and `S_ψ` are real operators. `φ_l` depends only
//! on the subspace `D_l`, not on the eigenvector bases chosen for it.
//!
//! `S_ψ` is fiberwise: at the fiber `ξ`, `S(ξ) = d⁻¹ W Wᴴ` with `W` the `d x |G|`
//! matrix whose columns are the fibers at `ξ` of `π(γ_g) ψ`. With `W*W =
//! V Σ² V*` (top `k = dim D_l(ξ)` eigenpairs), `φ(ξ) = √d W V Σ⁻¹ V* e_1`.
//! The frame projection is `P_V(ξ) = d⁻¹ Σ_{g,l} w_{g,l} w_{g,l}*` with
//! `w_{g,l}` the fiber at `ξ` of `π(γ_g) φ_l`.

use crate::error::{Error, Result};
use crate::fiber::{Orbit, Symmetry};
use crate::fit::{check, OrbitSolution};
use crate::prng::SplitMix64;
use crate::progress::Progress;
use crate::spectrum::{fft2, ifft2_real};
use crate::stack::Image;
use nalgebra::{DMatrix, DVector};
use num_complex::Complex64;

/// A generator image with its realness check.
pub(crate) struct Generator {
    pub image: Image,
    /// `max |Im φ(x)| / ||φ||` before the imaginary part was dropped.
    pub imaginary_part: f64,
}

/// Fixed reference images `e`: deterministic pseudo-random values, one per seed.
fn reference_image(n1: usize, n2: usize, which: u64) -> Image {
    let mut rng = SplitMix64(0x0b17_5ba2_0000_0001 ^ which.wrapping_mul(0x9E37_79B9_7F4A_7C15));
    Image::new(n1, n2, (0..n1 * n2).map(|_| rng.between(-1.0, 1.0)).collect())
}

/// How many reference images an orbit may try, and the conditioning
/// (smallest over largest kept eigenvalue of `WᴴW`) that is good enough.
/// Round-off in `φ` grows like machine epsilon over this ratio.
const REFERENCES: u64 = 4;
const GOOD_CONDITIONING: f64 = 1e-4;

/// `φ` at every point of one orbit from `ψ` (already set on the orbit), with
/// the worst conditioning met.
fn orbit_generator(sym: &Symmetry, orbit: &Orbit, k: usize, psi: &[Complex64]) -> (Vec<([usize; 2], DVector<Complex64>)>, f64) {
    let l = sym.lattice();
    let d = l.fiber_len();
    let mut worst = f64::INFINITY;
    let mut out = Vec::with_capacity(orbit.points.len());
    for &(fiber, _) in &orbit.points {
        let xi = l.fiber_rep(fiber);
        let w = fiber_matrix(sym, xi, &[psi]);
        let eig = nalgebra::SymmetricEigen::new(w.adjoint() * &w);
        let mut order: Vec<usize> = (0..eig.eigenvalues.len()).collect();
        order.sort_by(|&i, &j| eig.eigenvalues[j].total_cmp(&eig.eigenvalues[i]));
        let top = eig.eigenvalues[order[0]];
        let kth = eig.eigenvalues[order[k - 1]];
        let ratio = if top > 0.0 && kth > 0.0 { kth / top } else { 0.0 };
        worst = worst.min(ratio);
        let mut coef = DVector::<Complex64>::zeros(sym.order());
        if ratio > 0.0 {
            for &e in &order[..k] {
                let v = eig.eigenvectors.column(e);
                coef += v * (v[0].conj() / eig.eigenvalues[e].sqrt());
            }
        }
        out.push((xi, (&w * coef) * Complex64::new((d as f64).sqrt(), 0.0)));
    }
    (out, worst)
}

/// The Parseval generators `φ_1..φ_L` in the group frame (origin at (0,0)).
///
/// Per orbit the reference image is the first of [`REFERENCES`] fixed ones
/// whose conditioning reaches [`GOOD_CONDITIONING`] (else the best); the
/// conjugate orbit `−O` reuses the choice made for `O`, so `ψ` and `φ` are real.
pub(crate) fn parseval_generators(
    sym: &Symmetry,
    orbits: &[Orbit],
    solutions: &[OrbitSolution],
    lmax: usize,
    progress: &mut dyn Progress,
) -> Result<Vec<Generator>> {
    let l = sym.lattice();
    let [n1, n2] = l.torus();
    let references: Vec<Vec<Complex64>> = (0..REFERENCES).map(|c| fft2(&reference_image(n1, n2, c))).collect();
    // conjugate[o]: the orbit holding −ξ0.
    let mut orbit_of_fiber = vec![0; l.fiber_count()];
    for (o, orbit) in orbits.iter().enumerate() {
        for &(f, _) in &orbit.points {
            orbit_of_fiber[f] = o;
        }
    }
    let conjugate: Vec<usize> = orbits.iter().map(|o| orbit_of_fiber[l.fiber_of(l.neg(o.rep))]).collect();
    let mut out = Vec::with_capacity(lmax);
    for layer in 0..lmax {
        check(progress, "building generators", layer as f64 / lmax as f64)?;
        let mut psi = vec![Complex64::new(0.0, 0.0); n1 * n2];
        let mut phi = vec![Complex64::new(0.0, 0.0); n1 * n2];
        let mut chosen = vec![0u64; orbits.len()];
        for (o, (orbit, sol)) in orbits.iter().zip(solutions).enumerate() {
            let q = &sol.layers[layer];
            let k = q.ncols();
            if k == 0 {
                continue;
            }
            let candidates: Vec<u64> = if conjugate[o] < o { vec![chosen[conjugate[o]]] } else { (0..REFERENCES).collect() };
            let mut best: Option<(u64, Vec<([usize; 2], DVector<Complex64>)>, f64)> = None;
            for c in candidates {
                // ψ = P_{D_l} e on this orbit: transport each point to ξ0,
                // project on the layer's basis there, transport back.
                for &(_, op) in &orbit.points {
                    let gather = sym.gather(orbit.rep, op);
                    let x = DVector::from_vec(gather.apply(&references[c as usize]));
                    let y = q * (q.adjoint() * x);
                    gather.scatter(y.as_slice(), &mut psi);
                }
                let (fibers, worst) = orbit_generator(sym, orbit, k, &psi);
                let better = best.as_ref().map_or(true, |b| worst > b.2);
                if better {
                    best = Some((c, fibers, worst));
                }
                if worst >= GOOD_CONDITIONING {
                    break;
                }
            }
            let (c, fibers, worst) = best.expect("at least one candidate");
            if !(worst > 1e-20) {
                return Err(Error::Internal(format!(
                    "generator {} at frequency {:?}: no reference vector generates its layer",
                    layer + 1,
                    orbit.rep
                )));
            }
            chosen[o] = c;
            for (xi, v) in fibers {
                sym.gather(xi, 0).scatter(v.as_slice(), &mut phi);
            }
        }
        let (image, imag) = ifft2_real(&phi, n1, n2);
        let norm = image.energy().sqrt();
        out.push(Generator { imaginary_part: if norm > 0.0 { imag / norm } else { 0.0 }, image });
    }
    Ok(out)
}

/// The `d x (|G| · count)` matrix of fibers at `xi` of `π(γ_g) φ` for every
/// point-group element `g` and every spectrum `φ`; column `g · count + j`.
pub(crate) fn fiber_matrix(sym: &Symmetry, xi: [usize; 2], spectra: &[&[Complex64]]) -> DMatrix<Complex64> {
    let d = sym.lattice().fiber_len();
    let count = spectra.len();
    let mut w = DMatrix::zeros(d, sym.order() * count);
    for g in 0..sym.order() {
        let gather = sym.gather(xi, g);
        for (j, s) in spectra.iter().enumerate() {
            let v = gather.apply(s);
            w.column_mut(g * count + j).copy_from_slice(&v);
        }
    }
    w
}

/// Replaces each spectrum by that of its orthogonal projection onto the
/// span of the Γ-orbit of the generators, using the Parseval frame
/// operator `P(ξ) = d⁻¹ W Wᴴ` at each orbit representative and transporting
/// each orbit point there and back.
pub(crate) fn frame_project(sym: &Symmetry, generator_spectra: &[Vec<Complex64>], spectra: &mut [Vec<Complex64>]) {
    let d = sym.lattice().fiber_len() as f64;
    let gens: Vec<&[Complex64]> = generator_spectra.iter().map(|g| g.as_slice()).collect();
    let pixels = sym.lattice().pixels();
    let mut outputs = vec![vec![Complex64::new(0.0, 0.0); pixels]; spectra.len()];
    for orbit in sym.orbits() {
        let w = fiber_matrix(sym, orbit.rep, &gens);
        let wh = w.adjoint();
        for &(_, op) in &orbit.points {
            let gather = sym.gather(orbit.rep, op);
            for (s, out) in spectra.iter().zip(outputs.iter_mut()) {
                let x = DVector::from_vec(gather.apply(s));
                let y = &w * (&wh * x) * Complex64::new(1.0 / d, 0.0);
                gather.scatter(y.as_slice(), out);
            }
        }
    }
    for (s, o) in spectra.iter_mut().zip(outputs) {
        *s = o;
    }
}
