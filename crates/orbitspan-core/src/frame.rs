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
use crate::fiber::{for_each_parallel, Gather, HalfFibers, Orbit, Symmetry};
use crate::fit::{adjoint_product_parts, from_group_frame, product_parts, split, OrbitSolution};
use crate::matmul::{self, Part};
use crate::pair_fibers;
use crate::prng::SplitMix64;
use crate::spectrum::{half_width, ifft2_half_real, negative_index};
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
    let negative = |x: usize, n: usize| if x == 0 { 0 } else { n - x };
    let mirror = negative(a, n1) * n2 + negative(b, n2);
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
    // M = V Σ⁻³ Vᴴ over the top k eigenpairs; φ0 = √d W M (Wᴴ y).
    let (m, ratio) = top_power(narrow_gram(&w), k, -1.5);
    let (wa, wb) = split(&w);
    let phi = product_parts(&wa, &wb, &(m * adjoint_product_parts(&wa, &wb, y))) * Complex64::new((d as f64).sqrt(), 0.0);
    (phi, ratio)
}

/// `Σ v λ^power vᴴ` over the top `k` eigenpairs of the Hermitian `gram`
/// (zero when the `k`-th eigenvalue is not positive), and the conditioning
/// `λ_k / λ_1` (zero then too).
fn top_power(gram: DMatrix<Complex64>, k: usize, power: f64) -> (DMatrix<Complex64>, f64) {
    let (eigenvalues, eigenvectors) = eigen::hermitian(gram);
    let mut order: Vec<usize> = (0..eigenvalues.len()).collect();
    order.sort_by(|&i, &j| eigenvalues[j].total_cmp(&eigenvalues[i]));
    let top = eigenvalues[order[0]];
    let kth = eigenvalues[order[k - 1]];
    let ratio = if top > 0.0 && kth > 0.0 { kth / top } else { 0.0 };
    let n = eigenvalues.len();
    let mut m = DMatrix::<Complex64>::zeros(n, n);
    if ratio > 0.0 {
        for &e in &order[..k] {
            let v = eigenvectors.column(e);
            let scale = Complex64::new(eigenvalues[e].powf(power), 0.0);
            m += (v * scale) * v.adjoint();
        }
    }
    (m, ratio)
}

/// [`orbit_generator`] for an orbit with a trivial stabiliser, from the
/// layer's basis `q` (`d x k`, real and imaginary parts) and `c = Qᴴ x` (`k x r`, `x` the reference's
/// columns `T_jᴴ e(ξ_j)`), without `ψ` or `W`.
///
/// With a trivial stabiliser every element `g` is the first (only) one
/// reaching its point `j(g)`, so the gather of `g` at `ξ0` is the transport
/// `T_{j(g)}` that put `y_j = T_jᴴ ψ(ξ_j)` there: `W` is `Y = Q C` with its
/// columns permuted, and `W M Wᴴ = Y M_Y Yᴴ` (`M_Y` made from `YᴴY` the
/// same way). As `vᴴ (YᴴY) = λ vᴴ` for each eigenpair,
/// `φ0 = √d Y M_Y (Yᴴ Y) = √d Q C N` with `N = Σ_top k v λ^{−1/2} vᴴ`, and
/// `YᴴY = Cᴴ C` for orthonormal `Q`: two `d`-long products per layer
/// (`C = Qᴴx`, made by the caller, and `Q (C N)`) instead of five.
/// The conditioning is read from the same eigenvalues.
fn free_orbit_generator(d: usize, q: &LayerBasis, k: usize, c: &DMatrix<Complex64>) -> (DMatrix<Complex64>, f64) {
    let (n, ratio) = top_power(c.adjoint() * c, k, -0.5);
    let phi = q.times(&(c * n)) * Complex64::new((d as f64).sqrt(), 0.0);
    (phi, ratio)
}

/// One layer's orthonormal basis `Q` made ready for the products `Qᴴ x`
/// and `Q w`: its real and imaginary parts (four real products each), or,
/// when `Q = S Z` with `Z` real and `S` diagonal and unimodular (see
/// [`OrbitSolution::twist`]), `Z` and `S`: then `Qᴴ x = Zᵀ (Sᴴ x)` and
/// `Q w = S (Z w)`, one real product each, with the real and imaginary
/// parts of `Sᴴ x` (or `w`) side by side.
enum LayerBasis<'a> {
    Parts(DMatrix<f64>, DMatrix<f64>),
    Untwisted(DMatrix<f64>, &'a [Complex64]),
}

impl<'a> LayerBasis<'a> {
    fn new(q: &DMatrix<Complex64>, twist: Option<&'a [Complex64]>) -> LayerBasis<'a> {
        match twist {
            // `Sᴴ Q` is real up to round-off; its real part is `Z`.
            Some(s) => LayerBasis::Untwisted(DMatrix::from_fn(q.nrows(), q.ncols(), |a, c| (s[a].conj() * q[(a, c)]).re), s),
            None => {
                let (re, im) = split(q);
                LayerBasis::Parts(re, im)
            }
        }
    }
    /// `Qᴴ x`.
    fn adjoint_times(&self, x: &DMatrix<Complex64>) -> DMatrix<Complex64> {
        match self {
            LayerBasis::Parts(a, b) => adjoint_product_parts(a, b, x),
            LayerBasis::Untwisted(z, s) => {
                let w = side_by_side_parts(x, |a, v| s[a].conj() * v);
                joined_parts(&matmul::mul(1.0, Part::of(z).t(), Part::of(&w)))
            }
        }
    }
    /// `Q w`.
    fn times(&self, w: &DMatrix<Complex64>) -> DMatrix<Complex64> {
        match self {
            LayerBasis::Parts(a, b) => product_parts(a, b, w),
            LayerBasis::Untwisted(z, s) => {
                let zw = joined_parts(&matmul::mul(1.0, Part::of(z), Part::of(&side_by_side_parts(w, |_, v| v))));
                DMatrix::from_fn(zw.nrows(), zw.ncols(), |a, c| s[a] * zw[(a, c)])
            }
        }
    }
}

/// `[Re f(x) | Im f(x)]` for a complex `x` (`n x c` gives `n x 2c`), `f`
/// applied to each entry with its row.
fn side_by_side_parts(x: &DMatrix<Complex64>, f: impl Fn(usize, Complex64) -> Complex64) -> DMatrix<f64> {
    let c = x.ncols();
    let mut out = DMatrix::zeros(x.nrows(), 2 * c);
    for j in 0..c {
        for (a, &v) in x.column(j).iter().enumerate() {
            let z = f(a, v);
            out[(a, j)] = z.re;
            out[(a, c + j)] = z.im;
        }
    }
    out
}

/// The complex matrix whose real and imaginary parts lie side by side in
/// `m` (the inverse of [`side_by_side_parts`]).
fn joined_parts(m: &DMatrix<f64>) -> DMatrix<Complex64> {
    let c = m.ncols() / 2;
    DMatrix::from_fn(m.nrows(), c, |a, j| Complex64::new(m[(a, j)], m[(a, c + j)]))
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

/// One layer's shares, per orbit (see [`GeneratorSpectra`]).
pub(crate) type LayerShares = Vec<Option<DMatrix<Complex64>>>;

/// The Parseval generators `φ_1..φ_L` as they arrive, orbit by orbit, made
/// into images at the end.
///
/// Each orbit's share (see [`orbit_generators`]) is kept at the orbit's
/// primary points only (a fiber `f` with `f ≤ −f`, as in
/// [`crate::pair_fibers`]): after [`make_hermitian`] the values at the
/// other points are the conjugates of these, so the kept shares of all
/// orbits hold about half of each generator's spectrum, while the images'
/// fibers of the pairs already solved have been dropped. At the end each
/// generator's half spectrum (the columns `ξ2 = 0..=n2/2`, see
/// [`half_width`]) is written from its layer of every share, that layer
/// of the shares dropped, and the half spectrum transformed: one
/// generator's spectrum at a time per thread, never all of them. Each orbit
/// writes only its own frequencies and their negatives, in orbit order,
/// so the result does not depend on where or in which order the shares
/// were made.
pub(crate) struct GeneratorSpectra {
    lmax: usize,
    /// Per layer, per orbit: the share's columns at the orbit's primary
    /// points (`None` for an empty layer or an orbit not yet written).
    layers: Vec<LayerShares>,
    /// Per orbit, its primary points (indices into its points).
    primary: Vec<Vec<usize>>,
}

impl GeneratorSpectra {
    /// Room for every orbit's share; the primary points are found here, up
    /// front, so that these small lists are not made among the large
    /// buffers freed and made while the pairs are solved (in WebAssembly
    /// the memory never shrinks, and such lists can pin it).
    pub fn new(sym: &Symmetry, orbits: &[Orbit], lmax: usize) -> GeneratorSpectra {
        let primary = orbits.iter().map(|orbit| primary_points(sym, orbit)).collect();
        GeneratorSpectra { lmax, layers: vec![vec![None; orbits.len()]; lmax], primary }
    }

    /// Keeps orbit `o`'s share (made conjugate-symmetric by
    /// [`make_hermitian`]) at its primary points.
    pub fn write(&mut self, o: usize, share: &[(u64, DMatrix<Complex64>)]) {
        let kept = share.iter().map(|(_, fibers)| (fibers.ncols() > 0).then(|| fibers.select_columns(&self.primary[o])));
        self.write_kept(o, kept.collect());
    }

    /// Keeps orbit `o`'s share given at its primary points already (per
    /// layer; `None` for an empty layer).
    pub fn write_kept(&mut self, o: usize, kept: Vec<Option<DMatrix<Complex64>>>) {
        for (layer, fibers) in self.layers.iter_mut().zip(kept) {
            layer[o] = fibers;
        }
    }

    /// The generator images, transformed on threads natively. `defects[l]`
    /// is `Σ_ξ |φ̂_l(ξ) − conj φ̂_l(−ξ)|²` over every frequency (the
    /// orbits' [`make_hermitian`]s): by Parseval the imaginary part that the
    /// inverse transform of the whole spectrum would have left has norm
    /// `(defect / 4|T|)^{1/2}`, reported relative to `||φ_l||` (an upper
    /// bound of its largest value). One transform per generator (not two
    /// generators per complex transform): a generator's values must not
    /// depend on which other generators exist, so that the generators for
    /// `L` are bit-identical to the first `L` for `L + 1`.
    ///
    /// Each image is moved out of the group frame (so that pixel `origin`
    /// of the group frame lands where it belongs) by the worker that made
    /// it, so no second set of generator images is held. `made[l]`, where
    /// present, is generator `l` made elsewhere from its taken layer
    /// ([`GeneratorSpectra::take_layer`], [`generator_image`]); the others
    /// are made here.
    pub fn into_generators(self, sym: &Symmetry, orbits: &[Orbit], defects: &[f64], origin: [usize; 2], made: Vec<Option<Generator>>) -> Vec<Generator> {
        let primary = &self.primary;
        let slots: Vec<Mutex<Option<LayerShares>>> = self.layers.into_iter().map(|layer| Mutex::new(Some(layer))).collect();
        let mut out = made;
        out.resize_with(self.lmax, || None);
        let missing: Vec<usize> = (0..self.lmax).filter(|&l| out[l].is_none()).collect();
        let Ok(()) = for_each_parallel(
            missing.len(),
            |k| {
                let l = missing[k];
                let shares = slots[l].lock().expect("generator layer").take().expect("each generator layer is taken once");
                generator_image(sym, orbits, primary, shares, defects[l], origin)
            },
            |k, generator| {
                out[missing[k]] = Some(generator);
                Ok::<(), Infallible>(())
            },
        );
        out.into_iter().map(|g| g.expect("every generator transformed")).collect()
    }

    /// Per orbit, its primary points (indices into its points).
    pub fn primary(&self) -> &[Vec<usize>] {
        &self.primary
    }

    /// Takes layer `l`'s shares out (to make that generator's image
    /// elsewhere, [`generator_image`]); [`GeneratorSpectra::into_generators`]
    /// must then be given that image.
    pub fn take_layer(&mut self, l: usize) -> LayerShares {
        std::mem::take(&mut self.layers[l])
    }
}

/// The orbit's primary points (indices into its points): the fibers `f`
/// with `f ≤ −f` (see [`crate::pair_fibers`]), where a generator's share is
/// kept.
pub(crate) fn primary_points(sym: &Symmetry, orbit: &Orbit) -> Vec<usize> {
    let fibers: Vec<usize> = orbit.points.iter().map(|&(f, _)| f).collect();
    pair_fibers::primary(sym, &fibers).iter().enumerate().filter(|(_, &p)| p).map(|(j, _)| j).collect()
}

/// One generator's image from its layer of every orbit's share (kept at
/// the orbits' primary points, see [`GeneratorSpectra`]) and its realness
/// defect (see [`GeneratorSpectra::into_generators`]): the half spectrum
/// written orbit by orbit, each value with its negative's conjugate, then
/// transformed and moved out of the group frame.
pub(crate) fn generator_image(
    sym: &Symmetry,
    orbits: &[Orbit],
    primary: &[Vec<usize>],
    shares: LayerShares,
    defect: f64,
    origin: [usize; 2],
) -> Generator {
    let [n1, n2] = sym.lattice().torus();
    let h2 = half_width(n2);
    let mut half = vec![Complex64::new(0.0, 0.0); n1 * h2];
    let mut put = |i: usize, v: Complex64| {
        let (r, c) = (i / n2, i % n2);
        if c < h2 {
            half[r * h2 + c] = v;
        }
    };
    for ((orbit, share), points) in orbits.iter().zip(shares).zip(primary) {
        let Some(share) = share else { continue };
        for (column, &j) in share.column_iter().zip(points) {
            // The transport is made again for each layer: held for all
            // layers it would take more memory than the shares themselves
            // (an index and a phase per value).
            let t = sym.gather(orbit.rep, orbit.points[j].1);
            for ((&i, &p), &x) in t.index.iter().zip(&t.phase).zip(column.iter()) {
                let v = p.conj() * x;
                put(i, v);
                put(negative_index(i, n1, n2), v.conj());
            }
        }
    }
    let image = from_group_frame(&ifft2_half_real(half, n1, n2), origin);
    let norm = image.energy().sqrt();
    let imaginary = (defect.max(0.0) / (4.0 * (n1 * n2) as f64)).sqrt();
    Generator { imaginary_part: if norm > 0.0 { imaginary / norm } else { 0.0 }, image }
}

/// Makes the shares of one pair of conjugate orbits (see
/// [`crate::fit::orbit_pairs`]; one orbit when it is its own conjugate)
/// conjugate-symmetric, and measures by how much they were not.
///
/// A real generator has `φ̂(−ξ) = conj φ̂(ξ)`; the shares meet it up to
/// round-off of the layer bases, which is large where the eigenvalues are
/// tiny. Each value becomes the Hermitian part `(φ̂(ξ) + conj φ̂(−ξ)) / 2`:
/// the spectrum of the real part of the generator, which is what the
/// inverse transform of the whole spectrum followed by dropping the
/// imaginary part would give. (Keeping `φ̂(ξ)` on one half of the spectrum
/// instead would mix, within one fiber, entries of two slightly different
/// Parseval vectors: a first-order error in the frame, where the Hermitian
/// part's is second-order.) Returns per orbit and layer
/// `Σ_ξ |φ̂_l(ξ) − conj φ̂_l(−ξ)|²` over the orbit's frequencies, before the
/// change. A layer without a share counts as zeros.
pub(crate) fn make_hermitian(sym: &Symmetry, orbits: &[&Orbit], shares: &mut [&mut Vec<(u64, DMatrix<Complex64>)>]) -> Vec<Vec<f64>> {
    assert!(matches!(orbits.len(), 1 | 2) && orbits.len() == shares.len(), "one orbit or a conjugate pair");
    let [n1, n2] = sym.lattice().torus();
    let d = sym.lattice().fiber_len();
    // Per orbit, the indices and phases of its shares' entries, column-major
    // like the shares: entry `j d + k` is point `j`, position `k`, and
    // `φ̂[index] = conj(phase) · share[(k, j)]`.
    let entries: Vec<Gather> = orbits
        .iter()
        .map(|o| {
            let mut all = Gather { index: Vec::with_capacity(o.points.len() * d), phase: Vec::with_capacity(o.points.len() * d) };
            for &(_, op) in &o.points {
                let t = sym.gather(o.rep, op);
                all.index.extend_from_slice(&t.index);
                all.phase.extend_from_slice(&t.phase);
            }
            all
        })
        .collect();
    // Per orbit and entry, the entry of the conjugate orbit at `−ξ`.
    let mirrors: Vec<Vec<usize>> = POSITIONS.with(|table| {
        let mut table = table.borrow_mut();
        if table.len() != n1 * n2 {
            *table = vec![u32::MAX; n1 * n2];
        }
        (0..orbits.len())
            .map(|x| {
                let y = orbits.len() - 1 - x;
                for (e, &i) in entries[y].index.iter().enumerate() {
                    table[i] = u32::try_from(e).expect("fewer entries than frequencies");
                }
                let found: Vec<usize> = entries[x]
                    .index
                    .iter()
                    .map(|&i| table[negative_index(i, n1, n2)])
                    .map(|e| {
                        assert!(e != u32::MAX, "the conjugate orbit holds every negative frequency");
                        e as usize
                    })
                    .collect();
                for &i in &entries[y].index {
                    table[i] = u32::MAX;
                }
                found
            })
            .collect()
    });
    let zero = Complex64::new(0.0, 0.0);
    let layers = shares[0].len();
    let mut defects = vec![vec![0.0; layers]; orbits.len()];
    for l in 0..layers {
        let updated: Vec<Option<DMatrix<Complex64>>> = (0..orbits.len())
            .map(|x| {
                let y = orbits.len() - 1 - x;
                let (mine, theirs) = (&shares[x][l].1, &shares[y][l].1);
                if mine.ncols() == 0 && theirs.ncols() == 0 {
                    return None;
                }
                let value = |z: usize, share: &DMatrix<Complex64>, e: usize| match share.ncols() {
                    0 => zero,
                    _ => entries[z].phase[e].conj() * share.as_slice()[e],
                };
                let mut out = DMatrix::<Complex64>::zeros(d, orbits[x].points.len());
                let mut defect = 0.0;
                for (e, (o, &mirror)) in out.as_mut_slice().iter_mut().zip(&mirrors[x]).enumerate() {
                    let v = value(x, mine, e);
                    let w = value(y, theirs, mirror).conj();
                    defect += (v - w).norm_sqr();
                    *o = entries[x].phase[e] * ((v + w) * 0.5);
                }
                defects[x][l] = defect;
                Some(out)
            })
            .collect();
        for (share, new) in shares.iter_mut().zip(updated) {
            if let Some(new) = new {
                share[l].1 = new;
            }
        }
    }
    defects
}

thread_local! {
    /// Per thread: frequency index → entry of the share being looked up in
    /// [`make_hermitian`] (`u32::MAX` elsewhere), reused from pair to pair.
    static POSITIONS: std::cell::RefCell<Vec<u32>> = const { std::cell::RefCell::new(Vec::new()) };
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
    orbit_generators_by(sym, orbit, sol, lmax, forced, references, orbit.stabiliser.len() == 1)
}

/// [`orbit_generators`], through [`free_orbit_generator`] when `free` (only
/// right for a trivial stabiliser; the tests set it to `false` to compare
/// with the general way).
fn orbit_generators_by(
    sym: &Symmetry,
    orbit: &Orbit,
    sol: &OrbitSolution,
    lmax: usize,
    forced: Option<&[u64]>,
    references: &References,
    free: bool,
) -> Result<Vec<(u64, DMatrix<Complex64>)>> {
    let l = sym.lattice();
    let d = l.fiber_len();
    let empty = || (0, DMatrix::zeros(d, 0));
    if sol.layers.iter().all(|q| q.ncols() == 0) {
        return Ok((0..lmax).map(|_| empty()).collect());
    }
    let transports: Vec<Gather> = orbit.points.iter().map(|&(_, op)| sym.gather(orbit.rep, op)).collect();
    let (local_transports, rep_gathers) = match free {
        true => (Vec::new(), Vec::new()),
        false => compact_gathers(sym, orbit),
    };
    // The reference images transported to ξ0, one column per point, made
    // when a candidate is first tried.
    let mut transported: Vec<Option<DMatrix<Complex64>>> = vec![None; REFERENCES as usize];
    let mut psi = vec![Complex64::new(0.0, 0.0); if free { 0 } else { orbit.points.len() * d }];
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
        // The layer's basis made ready once for all its products.
        let basis = LayerBasis::new(q, sol.twist.as_deref());
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
            let coefficients = basis.adjoint_times(x);
            let (fibers, worst) = if free {
                free_orbit_generator(d, &basis, k, &coefficients)
            } else {
                let y = basis.times(&coefficients);
                for (j, t) in local_transports.iter().enumerate() {
                    t.scatter(y.column(j).as_slice(), &mut psi);
                }
                orbit_generator(d, &rep_gathers, k, &psi, &y)
            };
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

/// The general way's gathers into a compact buffer of the orbit's own
/// fibers (`ψ` lives there, so the many gathers per layer read a few
/// hundred kilobytes, not whole spectra): the transports, and every
/// element's gather at `ξ0` (to read `ψ`).
fn compact_gathers(sym: &Symmetry, orbit: &Orbit) -> (Vec<Gather>, Vec<Gather>) {
    let l = sym.lattice();
    SLOTS.with(|slots| {
        let mut slot = slots.borrow_mut();
        if slot.len() != l.fiber_count() {
            *slot = vec![usize::MAX; l.fiber_count()];
        }
        for (j, &(fiber, _)) in orbit.points.iter().enumerate() {
            slot[fiber] = j;
        }
        let local: Vec<Gather> = orbit.points.iter().map(|&(_, op)| sym.gather_local(orbit.rep, op, &slot)).collect();
        let at_rep: Vec<Gather> = (0..sym.order()).map(|g| sym.gather_local(orbit.rep, g, &slot)).collect();
        for &(fiber, _) in &orbit.points {
            slot[fiber] = usize::MAX;
        }
        (local, at_rep)
    })
}

/// The `d x (|G| · count)` matrix of fibers at `xi` of `π(γ_g) φ` for every
/// point-group element `g` and every spectrum `φ` (column `g · count + j`),
/// from the gathers at `xi` of every element.
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

/// [`gathered_matrix`] at `xi` for every point-group element, from
/// spectra of real images kept by [`HalfFibers::keep`].
fn half_gathered_matrix(sym: &Symmetry, half: &HalfFibers, xi: [usize; 2], kept: &[Vec<Complex64>]) -> DMatrix<Complex64> {
    let d = sym.lattice().fiber_len();
    let count = kept.len();
    let mut w = DMatrix::zeros(d, sym.order() * count);
    for g in 0..sym.order() {
        let (gather, conj) = half.gather(sym, xi, g);
        for (j, s) in kept.iter().enumerate() {
            let column = w.column_mut(g * count + j);
            for ((o, &i), &p) in column.into_iter().zip(&gather.index).zip(&gather.phase) {
                *o = p * if conj { s[i].conj() } else { s[i] };
            }
        }
    }
    w
}

/// Replaces each spectrum by that of its orthogonal projection onto the
/// span of the Γ-orbit of the generators, using the Parseval frame
/// operator `P(ξ) = d⁻¹ W Wᴴ` at each orbit representative and transporting
/// each orbit point there and back. All spectra go through an orbit's
/// fibers at once (`W (Wᴴ X)` with `X` the `d x rm` matrix of the fibers
/// of its `r` points in the `m` spectra, transported to `ξ0`); orbits run
/// on several threads and each fiber is written in place, so the result does
/// not depend on the thread count. The generators' spectra come as
/// [`HalfFibers::keep`] makes them: `W` gathers `|G| · L` fibers per
/// orbit, each from `d` neighbouring values.
pub(crate) fn frame_project(sym: &Symmetry, half: &HalfFibers, generator_fibers: &[Vec<Complex64>], spectra: &mut [Vec<Complex64>]) {
    let d = sym.lattice().fiber_len() as f64;
    let orbits = sym.orbits();
    let count = spectra.len();
    // Every point's fibers of every spectrum side by side (point-major), so
    // that an orbit is one pair of matrix products, not one per point.
    let work = |k: usize, spectra: &[Vec<Complex64>]| -> (Vec<Gather>, DMatrix<Complex64>) {
        let orbit = &orbits[k];
        let (wa, wb) = split(&half_gathered_matrix(sym, half, orbit.rep, generator_fibers));
        let gathers: Vec<Gather> = orbit.points.iter().map(|&(_, op)| sym.gather(orbit.rep, op)).collect();
        let mut x = DMatrix::<Complex64>::zeros(wa.nrows(), gathers.len() * count);
        for (p, gather) in gathers.iter().enumerate() {
            for (i, s) in spectra.iter().enumerate() {
                gather.apply_into(s, x.column_mut(p * count + i).as_mut_slice());
            }
        }
        let y = product_parts(&wa, &wb, &adjoint_product_parts(&wa, &wb, &x)) * Complex64::new(1.0 / d, 0.0);
        (gathers, y)
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
        for (gathers, y) in writes {
            for (p, gather) in gathers.iter().enumerate() {
                for (i, s) in spectra.iter_mut().enumerate() {
                    gather.scatter(y.column(p * count + i).as_slice(), s);
                }
            }
        }
    }
}

/// Orbits per wave in [`frame_project`].
const PROJECTION_WAVE: usize = 32;

#[cfg(test)]
mod tests {
    use super::*;
    use crate::fit::orbit_pairs;
    use crate::plane_group::{GroupSymbol, PlaneGroup};

    /// The trivial-stabiliser shortcut ([`free_orbit_generator`]) against
    /// the general way (`ψ` scattered on the orbit, gathered back at `ξ0`
    /// by every element, `φ0 = √d W M Wᴴ y`), on every orbit with a trivial
    /// stabiliser, with random orthonormal layers of one, two and `r`
    /// columns (random layers are not always well conditioned, and round-off
    /// grows like machine epsilon over the conditioning, hence 1e-10);
    /// groups whose operations have translations (pg, pgg, p4g)
    /// and a centred lattice (cmm) included. Same reference chosen, same
    /// shares to round-off.
    #[test]
    fn free_orbits_match_the_general_way() {
        let mut rng = SplitMix64(5);
        for (symbol, n, cell) in [
            (GroupSymbol::P1, [8, 6], [4, 3]),
            (GroupSymbol::Pg, [16, 16], [4, 4]),
            (GroupSymbol::Pgg, [24, 16], [6, 4]),
            (GroupSymbol::Cmm, [32, 32], [8, 8]),
            (GroupSymbol::P4g, [24, 24], [4, 4]),
            (GroupSymbol::P6m, [24, 24], [4, 4]),
        ] {
            let sym = Symmetry::new(n, cell, &PlaneGroup::standard(symbol)).unwrap();
            let d = sym.lattice().fiber_len();
            let references = References::new(n);
            let mut compared = 0;
            for orbit in sym.orbits().iter().filter(|o| o.stabiliser.len() == 1) {
                let r = orbit.points.len();
                // Complex layers, and layers `S Z` (`Z` real) with their twist
                // `S` given: then the products are made in real arithmetic,
                // on the shortcut and on the general way, against the general
                // way with the complex products.
                let s: Vec<Complex64> = (0..d).map(|_| Complex64::from_polar(1.0, rng.between(-3.2, 3.2))).collect();
                for twisted in [false, true] {
                    let layers: Vec<DMatrix<Complex64>> = [1, 2.min(r), r]
                        .iter()
                        .map(|&k| match twisted {
                            false => DMatrix::from_fn(d, k.min(d), |_, _| Complex64::new(rng.between(-1.0, 1.0), rng.between(-1.0, 1.0))).qr().q(),
                            true => {
                                let z = DMatrix::from_fn(d, k.min(d), |_, _| rng.between(-1.0, 1.0)).qr().q();
                                DMatrix::from_fn(d, z.ncols(), |a, c| s[a] * z[(a, c)])
                            }
                        })
                        .collect();
                    let plain = OrbitSolution { layer_energy: vec![0.0; 3], tail: 0.0, layers, image_discarded: Vec::new(), twist: None };
                    let sol = OrbitSolution { twist: twisted.then(|| s.clone()), ..plain.clone() };
                    let general = orbit_generators_by(&sym, orbit, &plain, 3, None, &references, false).unwrap();
                    let mut ways = vec![orbit_generators_by(&sym, orbit, &sol, 3, None, &references, true).unwrap()];
                    if twisted {
                        ways.push(orbit_generators_by(&sym, orbit, &sol, 3, None, &references, false).unwrap());
                    }
                    for way in ways {
                        for (l, (a, b)) in way.iter().zip(&general).enumerate() {
                            assert_eq!(a.0, b.0, "{symbol:?} at {:?} layer {l}: reference", orbit.rep);
                            let err = (&a.1 - &b.1).norm();
                            assert!(b.1.norm() > 0.1 && err < 1e-10 * b.1.norm(), "{symbol:?} at {:?} layer {l} ({twisted}): {err} of {}", orbit.rep, b.1.norm());
                        }
                    }
                }
                compared += 1;
            }
            assert!(compared > 0, "{symbol:?}: no orbit with a trivial stabiliser");
        }
    }

    /// [`make_hermitian`] against the whole spectrum written out (the slow
    /// obvious reference): random shares of every orbit pair scattered into
    /// one `n1 x n2` array `F`; the defects must be `Σ |F(ξ) − conj F(−ξ)|²`
    /// over each orbit's frequencies, and the new shares must scatter to the
    /// Hermitian part `(F(ξ) + conj F(−ξ)) / 2`. Groups with `−I` (each orbit
    /// its own conjugate) and without (orbits in pairs); an empty layer in
    /// one orbit of a pair counts as zeros.
    #[test]
    fn hermitian_shares_match_the_whole_spectrum() {
        let mut rng = SplitMix64(99);
        for (symbol, n, cell) in [(GroupSymbol::P1, [8, 6], [4, 3]), (GroupSymbol::P3, [12, 12], [4, 4]), (GroupSymbol::Pmm, [8, 8], [4, 4]), (GroupSymbol::P4m, [12, 12], [4, 4])] {
            let sym = Symmetry::new(n, cell, &PlaneGroup::standard(symbol)).unwrap();
            let orbits = sym.orbits();
            let d = sym.lattice().fiber_len();
            let layers = 2;
            let mut shares: Vec<Vec<(u64, DMatrix<Complex64>)>> = orbits
                .iter()
                .map(|o| {
                    (0..layers)
                        .map(|_| (0, DMatrix::from_fn(d, o.points.len(), |_, _| Complex64::new(rng.between(-1.0, 1.0), rng.between(-1.0, 1.0)))))
                        .collect()
                })
                .collect();
            let pairs = orbit_pairs(&sym, &orbits);
            if let Some(p) = pairs.iter().find(|p| p.len() == 2) {
                shares[p[1]][1].1 = DMatrix::zeros(d, 0);
            }
            let whole = |shares: &[Vec<(u64, DMatrix<Complex64>)>], l: usize| {
                let mut f = vec![Complex64::new(0.0, 0.0); n[0] * n[1]];
                for (o, orbit) in orbits.iter().enumerate() {
                    let m = &shares[o][l].1;
                    for (j, &(_, op)) in orbit.points.iter().enumerate().filter(|_| m.ncols() > 0) {
                        sym.gather(orbit.rep, op).scatter(m.column(j).as_slice(), &mut f);
                    }
                }
                f
            };
            let before: Vec<Vec<Complex64>> = (0..layers).map(|l| whole(&shares, l)).collect();
            let mut pair_defects = Vec::new();
            for pair in &pairs {
                let pair_orbits: Vec<&Orbit> = pair.iter().map(|&o| &orbits[o]).collect();
                let mut taken: Vec<Vec<(u64, DMatrix<Complex64>)>> = pair.iter().map(|&o| std::mem::take(&mut shares[o])).collect();
                let defects = make_hermitian(&sym, &pair_orbits, &mut taken.iter_mut().collect::<Vec<_>>());
                for (k, &o) in pair.iter().enumerate() {
                    for (l, f) in before.iter().enumerate() {
                        let expected: f64 = orbits[o]
                            .points
                            .iter()
                            .flat_map(|&(_, op)| sym.gather(orbits[o].rep, op).index)
                            .map(|i| (f[i] - f[negative_index(i, n[0], n[1])].conj()).norm_sqr())
                            .sum();
                        assert!(expected > 0.1, "{symbol:?}: random shares are far from Hermitian");
                        assert!((defects[k][l] - expected).abs() < 1e-12 * expected, "{symbol:?} orbit {o} layer {l}: {} vs {expected}", defects[k][l]);
                    }
                }
                for (&o, share) in pair.iter().zip(taken) {
                    shares[o] = share;
                }
                pair_defects.push(defects);
            }
            let mut defects = vec![0.0; layers];
            for (pair, defect) in pairs.iter().zip(&pair_defects) {
                for (k, _) in pair.iter().enumerate() {
                    for l in 0..layers {
                        defects[l] += defect[k][l];
                    }
                }
            }
            // The generator images: the real part of the inverse transform
            // of the whole spectrum, and the norm of its imaginary part.
            let mut spectra = GeneratorSpectra::new(&sym, &orbits, layers);
            for (o, share) in shares.iter().enumerate() {
                spectra.write(o, share);
            }
            for (l, generator) in spectra.into_generators(&sym, &orbits, &defects, [0, 0], Vec::new()).iter().enumerate() {
                let mut z = before[l].clone();
                crate::spectrum::fft2_in_place(&mut z, n[0], n[1], true);
                let scale = 1.0 / (n[0] * n[1]) as f64;
                let real: Vec<f64> = z.iter().map(|v| v.re * scale).collect();
                let imaginary = z.iter().map(|v| (v.im * scale).powi(2)).sum::<f64>().sqrt();
                let err = generator.image.pixels.iter().zip(&real).map(|(a, b)| (a - b).abs()).fold(0.0, f64::max);
                assert!(err < 1e-14, "{symbol:?} generator {l}: {err}");
                let expected = imaginary / generator.image.energy().sqrt();
                assert!((generator.imaginary_part - expected).abs() < 1e-12 * expected, "{symbol:?} generator {l}: {} vs {expected}", generator.imaginary_part);
            }
            for (l, f) in before.iter().enumerate() {
                let after = whole(&shares, l);
                for (i, z) in after.iter().enumerate() {
                    let hermitian = (f[i] + f[negative_index(i, n[0], n[1])].conj()) * 0.5;
                    assert!((z - hermitian).norm() < 1e-14, "{symbol:?} layer {l} at {i}: {z} vs {hermitian}");
                }
            }
        }
    }
}
