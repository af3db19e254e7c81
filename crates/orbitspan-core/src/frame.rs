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
//! V Σ² V*` (top `k = dim D_l(ξ)` eigenpairs), `S(ξ)^{−1/2} = √d W V Σ⁻³ V* W*`
//! on the range. `S_ψ` commutes with `Γ`, so at an orbit's point
//! `ξ_j = g_jᵀ ξ0` it is the transport of `S(ξ0)`: with `T_j` the transport
//! (the gather of `g_j` at `ξ0` reads `T_jᴴ f̂(ξ_j)`),
//! `φ(ξ_j) = T_j S(ξ0)^{−1/2} T_jᴴ ψ(ξ_j)`, one decomposition per orbit and
//! layer at `ξ0`.
//! The frame projection is `P_V(ξ) = d⁻¹ Σ_{g,l} w_{g,l} w_{g,l}*` with
//! `w_{g,l}` the fiber at `ξ` of `π(γ_g) φ_l`.

use crate::eigen;
use crate::error::{Error, Result};
use crate::fiber::{for_each_parallel, Gather, Orbit, Symmetry};
use crate::fit::{adjoint_product, product, OrbitSolution};
use crate::prng::SplitMix64;
use crate::spectrum::ifft2_real_owned;
use crate::stack::Image;
use nalgebra::DMatrix;
use num_complex::Complex64;
use std::convert::Infallible;
use std::sync::Mutex;

/// A generator image with its realness check.
pub(crate) struct Generator {
    pub image: Image,
    /// `max |Im φ(x)| / ||φ||` before the imaginary part was dropped.
    pub imaginary_part: f64,
}

/// The spectrum of fixed real reference image number `which`, at the
/// row-major frequency index `i`: deterministic pseudo-random values made
/// in the frequency domain, one frequency at a time (no transform and no
/// stored spectrum). Each frequency and its negative share one draw,
/// `ê(−ξ) = conj ê(ξ)`, and a frequency that is its own negative gets a
/// real value, so the image is real.
fn reference_value(torus: [usize; 2], which: u64, i: usize) -> Complex64 {
    let [n1, n2] = torus;
    let (a, b) = (i / n2, i % n2);
    let mirror = ((n1 - a) % n1) * n2 + (n2 - b) % n2;
    let draw = |k: usize| {
        let mut rng = SplitMix64(0x0b17_5ba2_0000_0001 ^ which.wrapping_mul(0x9E37_79B9_7F4A_7C15) ^ (k as u64).wrapping_mul(0xD1B5_4A32_D192_ED03));
        (rng.between(-1.0, 1.0), rng.between(-1.0, 1.0))
    };
    if i == mirror {
        Complex64::new(draw(i).0, 0.0)
    } else if i < mirror {
        let (re, im) = draw(i);
        Complex64::new(re, im)
    } else {
        let (re, im) = draw(mirror);
        Complex64::new(re, -im)
    }
}

/// How many reference images an orbit may try, and the conditioning
/// (smallest over largest kept eigenvalue of `WᴴW`) that is good enough.
/// Round-off in `φ` grows like machine epsilon over this ratio.
const REFERENCES: u64 = 4;
const GOOD_CONDITIONING: f64 = 1e-4;

/// `T_jᴴ φ(ξ_j)` for every point `j` of one orbit (columns), from `y` with
/// columns `T_jᴴ ψ(ξ_j)` and `ψ` (set on the orbit, in the compact buffer
/// that `rep_gathers`, the gathers at `ξ0` of every element, read), with
/// the conditioning met (smallest over largest kept eigenvalue of `WᴴW`).
fn orbit_generator(d: usize, rep_gathers: &[Gather], k: usize, psi: &[Complex64], y: &DMatrix<Complex64>) -> (DMatrix<Complex64>, f64) {
    let w = gathered_matrix(rep_gathers, &[psi]);
    let (eigenvalues, eigenvectors) = eigen::hermitian(narrow_gram(&w));
    let mut order: Vec<usize> = (0..eigenvalues.len()).collect();
    order.sort_by(|&i, &j| eigenvalues[j].total_cmp(&eigenvalues[i]));
    let top = eigenvalues[order[0]];
    let kth = eigenvalues[order[k - 1]];
    let ratio = if top > 0.0 && kth > 0.0 { kth / top } else { 0.0 };
    let n = eigenvalues.len();
    // M = V Σ⁻³ Vᴴ over the top k eigenpairs; φ0 = √d W M (Wᴴ y).
    let mut m = DMatrix::<Complex64>::zeros(n, n);
    if ratio > 0.0 {
        for &e in &order[..k] {
            let v = eigenvectors.column(e);
            let scale = Complex64::new(eigenvalues[e].powf(-1.5), 0.0);
            m += (v * scale) * v.adjoint();
        }
    }
    let phi = product(&w, &(m * adjoint_product(&w, y))) * Complex64::new((d as f64).sqrt(), 0.0);
    (phi, ratio)
}

/// `Wᴴ W` for a tall, narrow `W` (a few columns): one inner product per
/// entry of the upper triangle, mirrored (cheaper than the blocked real
/// products of `fit::gram` at this shape).
fn narrow_gram(w: &DMatrix<Complex64>) -> DMatrix<Complex64> {
    let n = w.ncols();
    let mut out = DMatrix::zeros(n, n);
    for b in 0..n {
        for a in 0..=b {
            let z = w.column(a).dotc(&w.column(b));
            out[(a, b)] = z;
            out[(b, a)] = z.conj();
        }
    }
    out
}

/// The reference images on one torus ([`reference_value`]).
pub(crate) struct References {
    torus: [usize; 2],
}

impl References {
    pub fn new(torus: [usize; 2]) -> References {
        References { torus }
    }
    /// `gather` applied to the spectrum of reference `which`.
    fn gather_into(&self, which: u64, gather: &Gather, out: &mut [Complex64]) {
        for ((o, &i), &p) in out.iter_mut().zip(&gather.index).zip(&gather.phase) {
            *o = p * reference_value(self.torus, which, i);
        }
    }
}

/// The spectra of the Parseval generators `φ_1..φ_L` in the group frame
/// (origin at (0,0)), written orbit by orbit from each orbit's share (see
/// [`orbit_generators`]): each orbit writes only its own fibers, so the
/// result does not depend on where or in which order the shares were made.
pub(crate) struct GeneratorSpectra {
    torus: [usize; 2],
    lmax: usize,
    /// Per layer, made on the first write.
    phis: Vec<Vec<Complex64>>,
}

impl GeneratorSpectra {
    pub fn new(torus: [usize; 2], lmax: usize) -> GeneratorSpectra {
        GeneratorSpectra { torus, lmax, phis: Vec::new() }
    }

    /// Writes one orbit's share: per layer, `φ_l(ξ_j) = T_j` applied to column `j`.
    pub fn write(&mut self, sym: &Symmetry, orbit: &Orbit, share: &[(u64, DMatrix<Complex64>)]) {
        if self.phis.is_empty() {
            let [n1, n2] = self.torus;
            self.phis = vec![vec![Complex64::new(0.0, 0.0); n1 * n2]; self.lmax];
        }
        let transports: Vec<Gather> = orbit.points.iter().map(|&(_, op)| sym.gather(orbit.rep, op)).collect();
        for (phi, (_, fibers)) in self.phis.iter_mut().zip(share) {
            for (transport, v) in transports.iter().zip(fibers.column_iter()) {
                transport.scatter(v.as_slice(), phi);
            }
        }
    }

    /// The generator images, transformed on threads natively, each spectrum
    /// dropped once transformed. One transform per generator (not two real
    /// images per complex transform): a generator's values must not depend
    /// on which other generators exist, so that the generators for `L` are
    /// bit-identical to the first `L` for `L + 1`.
    pub fn into_generators(self) -> Vec<Generator> {
        let [n1, n2] = self.torus;
        let mut phis = self.phis;
        if phis.is_empty() {
            phis = vec![vec![Complex64::new(0.0, 0.0); n1 * n2]; self.lmax];
        }
        let count = phis.len();
        let slots: Vec<Mutex<Option<Vec<Complex64>>>> = phis.into_iter().map(|phi| Mutex::new(Some(phi))).collect();
        let mut out: Vec<Option<Generator>> = (0..count).map(|_| None).collect();
        let Ok(()) = for_each_parallel(
            count,
            |l| {
                let phi = slots[l].lock().expect("generator spectrum").take().expect("each generator spectrum is taken once");
                let (image, imag) = ifft2_real_owned(phi, n1, n2);
                let norm = image.energy().sqrt();
                Generator { imaginary_part: if norm > 0.0 { imag / norm } else { 0.0 }, image }
            },
            |l, generator| {
                out[l] = Some(generator);
                Ok::<(), Infallible>(())
            },
        );
        out.into_iter().map(|g| g.expect("every generator transformed")).collect()
    }
}

thread_local! {
    /// Per thread: fiber → slot of the orbit being worked on (`usize::MAX`
    /// elsewhere), reused from orbit to orbit.
    static SLOTS: std::cell::RefCell<Vec<usize>> = const { std::cell::RefCell::new(Vec::new()) };
}

/// One orbit's share of every generator: per layer, the reference image
/// chosen and `T_jᴴ φ_l(ξ_j)` for every point `j` (columns; none for an
/// empty layer). The reference is the first of [`REFERENCES`] fixed ones
/// whose conditioning reaches [`GOOD_CONDITIONING`] (else the best);
/// `forced` gives the references to use instead (the conjugate orbit's
/// choice, so that `ψ` and `φ` are real).
pub(crate) fn orbit_generators(
    sym: &Symmetry,
    orbit: &Orbit,
    sol: &OrbitSolution,
    lmax: usize,
    forced: Option<&[u64]>,
    references: &References,
) -> Result<Vec<(u64, DMatrix<Complex64>)>> {
    let l = sym.lattice();
    let d = l.fiber_len();
    let empty = || (0, DMatrix::zeros(d, 0));
    if sol.layers.iter().all(|q| q.ncols() == 0) {
        return Ok((0..lmax).map(|_| empty()).collect());
    }
    // ψ lives in a compact buffer of the orbit's own fibers, so the many
    // gathers per layer read a few hundred kilobytes, not whole spectra.
    let transports: Vec<Gather> = orbit.points.iter().map(|&(_, op)| sym.gather(orbit.rep, op)).collect();
    let (local_transports, rep_gathers) = SLOTS.with(|slots| {
        let mut slot = slots.borrow_mut();
        if slot.len() != l.fiber_count() {
            *slot = vec![usize::MAX; l.fiber_count()];
        }
        for (j, &(fiber, _)) in orbit.points.iter().enumerate() {
            slot[fiber] = j;
        }
        let local: Vec<Gather> = transports.iter().map(|t| t.localised(l, &slot)).collect();
        // Every element's gather at ξ0 in the compact buffer (to read ψ).
        let at_rep: Vec<Gather> = (0..sym.order()).map(|g| sym.gather(orbit.rep, g).localised(l, &slot)).collect();
        for &(fiber, _) in &orbit.points {
            slot[fiber] = usize::MAX;
        }
        (local, at_rep)
    });
    // The reference images transported to ξ0, one column per point, made
    // when a candidate is first tried.
    let mut transported: Vec<Option<DMatrix<Complex64>>> = vec![None; REFERENCES as usize];
    let mut psi = vec![Complex64::new(0.0, 0.0); orbit.points.len() * d];
    let mut out = Vec::with_capacity(lmax);
    for layer in 0..lmax {
        let q = &sol.layers[layer];
        let k = q.ncols();
        if k == 0 {
            out.push(empty());
            continue;
        }
        let candidates: Vec<u64> = match forced {
            Some(f) => vec![f[layer]],
            None => (0..REFERENCES).collect(),
        };
        let mut best: Option<(u64, DMatrix<Complex64>, f64)> = None;
        for c in candidates {
            // ψ = P_{D_l} e on this orbit: transport each point to ξ0,
            // project on the layer's basis there, transport back.
            let x = transported[c as usize].get_or_insert_with(|| {
                let mut x = DMatrix::zeros(d, transports.len());
                for (j, t) in transports.iter().enumerate() {
                    references.gather_into(c, t, x.column_mut(j).as_mut_slice());
                }
                x
            });
            let y = product(q, &adjoint_product(q, x));
            for (j, t) in local_transports.iter().enumerate() {
                t.scatter(y.column(j).as_slice(), &mut psi);
            }
            let (fibers, worst) = orbit_generator(d, &rep_gathers, k, &psi, &y);
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
        out.push((c, fibers));
    }
    Ok(out)
}

/// The `d x (|G| · count)` matrix of fibers at `xi` of `π(γ_g) φ` for every
/// point-group element `g` and every spectrum `φ`; column `g · count + j`.
pub(crate) fn fiber_matrix(sym: &Symmetry, xi: [usize; 2], spectra: &[&[Complex64]]) -> DMatrix<Complex64> {
    let gathers: Vec<Gather> = (0..sym.order()).map(|g| sym.gather(xi, g)).collect();
    gathered_matrix(&gathers, spectra)
}

/// [`fiber_matrix`] from the gathers at `xi` of every point-group element.
fn gathered_matrix(gathers: &[Gather], spectra: &[&[Complex64]]) -> DMatrix<Complex64> {
    let d = gathers.first().map_or(0, |g| g.index.len());
    let count = spectra.len();
    let mut w = DMatrix::zeros(d, gathers.len() * count);
    for (g, gather) in gathers.iter().enumerate() {
        for (j, s) in spectra.iter().enumerate() {
            gather.apply_into(s, w.column_mut(g * count + j).as_mut_slice());
        }
    }
    w
}

/// Replaces each spectrum by that of its orthogonal projection onto the
/// span of the Γ-orbit of the generators, using the Parseval frame
/// operator `P(ξ) = d⁻¹ W Wᴴ` at each orbit representative and transporting
/// each orbit point there and back. All spectra go through each fiber at
/// once (`W (Wᴴ X)` with `X` the `d x m` matrix of their fibers); orbits run
/// on several threads and each fiber is written in place, so the result does
/// not depend on the thread count.
pub(crate) fn frame_project(sym: &Symmetry, generator_spectra: &[Vec<Complex64>], spectra: &mut [Vec<Complex64>]) {
    let d = sym.lattice().fiber_len() as f64;
    let gens: Vec<&[Complex64]> = generator_spectra.iter().map(|g| g.as_slice()).collect();
    let orbits = sym.orbits();
    let count = spectra.len();
    let work = |k: usize, spectra: &[Vec<Complex64>]| -> Vec<(Gather, DMatrix<Complex64>)> {
        let orbit = &orbits[k];
        let w = fiber_matrix(sym, orbit.rep, &gens);
        let mut out = Vec::with_capacity(orbit.points.len());
        for &(_, op) in &orbit.points {
            let gather = sym.gather(orbit.rep, op);
            let mut x = DMatrix::<Complex64>::zeros(gather.index.len(), count);
            for (i, s) in spectra.iter().enumerate() {
                gather.apply_into(s, x.column_mut(i).as_mut_slice());
            }
            let y = product(&w, &adjoint_product(&w, &x)) * Complex64::new(1.0 / d, 0.0);
            out.push((gather, y));
        }
        out
    };
    // Orbits in waves: workers read the spectra, then the calling thread
    // writes the wave's fibers (no orbit reads another's fibers), so memory
    // beyond the spectra is bounded by one wave.
    let indices: Vec<usize> = (0..orbits.len()).collect();
    for wave in indices.chunks(PROJECTION_WAVE) {
        let mut writes = Vec::with_capacity(wave.len());
        let reader: &[Vec<Complex64>] = spectra;
        let done: std::result::Result<(), std::convert::Infallible> =
            for_each_parallel(wave.len(), |j| work(wave[j], reader), |_, fibers| {
                writes.push(fibers);
                Ok(())
            });
        let Ok(()) = done;
        for (gather, y) in writes.into_iter().flatten() {
            for (i, s) in spectra.iter_mut().enumerate() {
                gather.scatter(y.column(i).as_slice(), s);
            }
        }
    }
}

/// Orbits per wave in [`frame_project`].
const PROJECTION_WAVE: usize = 32;
