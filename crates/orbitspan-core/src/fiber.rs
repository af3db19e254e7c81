//! The point group acting on Fourier fibers (MATH.md §4).
//!
//! For a coset representative `γ = (g, t)` and a fiber `ξ + Λ^⊥`, the fiber
//! at `ξ` of `π(γ) f` is `v_η = e^{−2πi (ξ+η)·t/n} f̂(gᵀ(ξ+η))`: a *gather*
//! from the spectrum at the fiber `gᵀξ + Λ^⊥`, times phases. The point group
//! permutes fibers; each orbit has a representative `ξ0` (its smallest fiber
//! index), a stabiliser `H`, and `r = |G|/|H|` points.

use crate::error::{Error, Result};
use crate::lattice::{Freq, Lattice};
use crate::plane_group::{mat_mul, mat_vec, IntMatrix, PlaneGroup};
use num_complex::Complex64;

/// A point-group element as an affine map of pixels `x ↦ g x + t`.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct PixelOp {
    pub g: IntMatrix,
    /// Translation in pixels.
    pub t: [i64; 2],
}

/// Indices into a row-major spectrum and phases: `v_k = phase_k · f̂[index_k]`.
#[derive(Clone, Debug)]
pub struct Gather {
    pub index: Vec<usize>,
    pub phase: Vec<Complex64>,
}

impl Gather {
    /// The gathered fiber vector of one spectrum.
    pub fn apply(&self, spectrum: &[Complex64]) -> Vec<Complex64> {
        self.index.iter().zip(&self.phase).map(|(&i, &p)| p * spectrum[i]).collect()
    }
    /// [`Gather::apply`] into a slice of the same length.
    pub fn apply_into(&self, spectrum: &[Complex64], out: &mut [Complex64]) {
        for ((o, &i), &p) in out.iter_mut().zip(&self.index).zip(&self.phase) {
            *o = p * spectrum[i];
        }
    }
    /// The same gather reading from a compact buffer that holds only some
    /// fibers: fiber `f` at slot `slot[f]`, its `d` values in the order of
    /// [`Lattice::dual`] (`ξ = rep(f) + η_k` at `slot[f] · d + k`). Every
    /// fiber this gather reads must have a slot. (The slow obvious form of
    /// [`Symmetry::gather_local`], which the fit uses.)
    pub fn localised(&self, lattice: &Lattice, slot: &[usize]) -> Gather {
        let n2 = lattice.torus()[1];
        let d = lattice.fiber_len();
        let index = self
            .index
            .iter()
            .map(|&i| {
                let xi = [i / n2, i % n2];
                let f = lattice.fiber_of(xi);
                let k = lattice.dual_index(lattice.sub(xi, lattice.fiber_rep(f))).expect("a frequency lies in its own fiber");
                slot[f] * d + k
            })
            .collect();
        Gather { index, phase: self.phase.clone() }
    }
    /// The inverse: writes `f̂[index_k] = conj(phase_k) · v_k`.
    pub fn scatter(&self, v: &[Complex64], spectrum: &mut [Complex64]) {
        for ((&i, &p), &x) in self.index.iter().zip(&self.phase).zip(v) {
            spectrum[i] = p.conj() * x;
        }
    }
}

/// Where a real image's spectrum is kept fiber by fiber, half of it: a
/// real image has `f̂(−ξ) = conj f̂(ξ)`, so the fiber holding `−ξ` (its
/// *mirror*) is the conjugate of the fiber holding `ξ`, reordered. Only
/// the primary fiber of each mirror couple ([`Lattice::is_primary`]) is
/// kept, its `d` values together
/// (`ξ = rep(f) + η_k` at `slot(f) · d + k`, `η_k` in the order of
/// [`Lattice::dual`]): about half the values of the whole spectrum, and a
/// gathered fiber is read from `d` neighbouring values instead of from
/// values spread over the whole spectrum (a page apart for large images).
#[derive(Clone, Debug)]
pub struct HalfFibers {
    /// Per fiber, its slot if it is primary, else `usize::MAX`.
    slot: Vec<usize>,
    /// Per fiber, [`Lattice::mirror_fiber`].
    mirror: Vec<usize>,
    /// `slot[f] = f` for every fiber: the whole layout that
    /// [`Symmetry::gather_local`] indexes, which [`HalfFibers::gather`]
    /// maps onto the kept half.
    every: Vec<usize>,
    /// [`Lattice::dual`], the order of each fiber's values.
    dual: Vec<Freq>,
}

impl HalfFibers {
    pub fn new(lattice: &Lattice) -> HalfFibers {
        let count = lattice.fiber_count();
        let mirror: Vec<usize> = (0..count).map(|f| lattice.mirror_fiber(f)).collect();
        let mut next = 0;
        let slot = (0..count)
            .map(|f| match lattice.is_primary(f) {
                true => {
                    next += 1;
                    next - 1
                }
                false => usize::MAX,
            })
            .collect();
        HalfFibers { slot, mirror, every: (0..count).collect(), dual: lattice.dual() }
    }

    /// The kept values of a real image's spectrum (row-major, whole).
    pub fn keep(&self, lattice: &Lattice, spectrum: &[Complex64]) -> Vec<Complex64> {
        let mut out = Vec::with_capacity(self.slot.iter().filter(|&&s| s != usize::MAX).count() * self.dual.len());
        for f in (0..self.slot.len()).filter(|&f| self.slot[f] != usize::MAX) {
            let rep = lattice.fiber_rep(f);
            out.extend(self.dual.iter().map(|&eta| spectrum[lattice.linear(lattice.add(rep, eta))]));
        }
        out
    }

    /// [`Symmetry::gather`] reading from [`HalfFibers::keep`]'s values:
    /// the gather and whether to conjugate each value it reads before its
    /// phase (`v_k = phase_k · conj(kept[index_k])` when `true`). Every value
    /// of a gather lies in one fiber; when that fiber is not kept its
    /// values are the conjugates of its mirror's, at the negated frequencies.
    pub fn gather(&self, sym: &Symmetry, xi: Freq, op: usize) -> (Gather, bool) {
        let l = sym.lattice();
        let d = l.fiber_len();
        let mut g = sym.gather_local(xi, op, &self.every);
        let Some(&first) = g.index.first() else { return (g, false) };
        let f = first / d;
        if self.slot[f] != usize::MAX {
            let base = self.slot[f] * d;
            g.index.iter_mut().for_each(|i| *i = base + *i % d);
            return (g, false);
        }
        let base = self.slot[self.mirror[f]] * d;
        let positions = l.mirror_positions(f, &self.dual).expect("the mirror fiber holds the negated frequencies");
        g.index.iter_mut().for_each(|i| *i = base + positions[*i % d]);
        (g, true)
    }
}

/// One orbit of the point group on the fibers.
#[derive(Clone, Debug)]
pub struct Orbit {
    /// Representative frequency `ξ0` (canonical representative of its fiber).
    pub rep: Freq,
    /// The orbit's fibers with the first operation (index into the point
    /// group) reaching each, in order of that operation; point 0 is `ξ0`,
    /// reached by the identity.
    pub points: Vec<(usize, usize)>,
    /// Indices of the stabiliser `H = { g : gᵀξ0 ∈ ξ0 + Λ^⊥ }`, identity first.
    pub stabiliser: Vec<usize>,
}

/// The plane group on a torus: lattice, point-group operations in pixels and
/// their multiplication table.
#[derive(Clone, Debug)]
pub struct Symmetry {
    lattice: Lattice,
    ops: Vec<PixelOp>,
    /// `product[a][b]` = index of the element `g_a g_b`.
    product: Vec<Vec<usize>>,
    dual: Vec<Freq>,
}

impl Symmetry {
    /// The group `group` with conventional cell `cell` on an `n1 x n2` torus.
    /// Checks that every operation maps the lattice and the torus to itself.
    pub fn new(n: [usize; 2], cell: [usize; 2], group: &PlaneGroup) -> Result<Symmetry> {
        let name = group.name();
        let lattice = Lattice::new(n, cell, group.symbol.is_centred())?;
        let pg = group.point_group();
        let mut ops = Vec::with_capacity(pg.order());
        for op in pg.coset_representatives() {
            let diagonal = op.g[0][1] == 0 && op.g[1][0] == 0;
            if !diagonal && (n[0] != n[1] || cell[0] != cell[1]) {
                return Err(Error::input(format!(
                    "plane group {name} rotates or exchanges the axes: it needs square images and a square cell (images {}x{}, cell {}x{})",
                    n[0], n[1], cell[0], cell[1]
                )));
            }
            let mut t = [0i64; 2];
            for i in 0..2 {
                if op.half[i] != 0 && cell[i] % 2 != 0 {
                    return Err(Error::input(format!(
                        "plane group {name} has a glide or centring by half a cell: the cell side {} must be even",
                        cell[i]
                    )));
                }
                t[i] = op.half[i] * cell[i] as i64 / 2;
            }
            // g must map the lattice to itself.
            let mut basis = vec![[cell[0] as i64, 0], [0, cell[1] as i64]];
            if lattice.is_centred() {
                basis.push([cell[0] as i64 / 2, cell[1] as i64 / 2]);
            }
            if basis.iter().any(|&k| !lattice.contains(mat_vec(&op.g, k))) {
                return Err(Error::input(format!(
                    "plane group {name} does not preserve a {}x{} cell; use a cell of the shape the group needs",
                    cell[0], cell[1]
                )));
            }
            ops.push(PixelOp { g: op.g, t });
        }
        let find = |g: &IntMatrix| ops.iter().position(|o| &o.g == g);
        let mut product = vec![vec![0; ops.len()]; ops.len()];
        for a in 0..ops.len() {
            for b in 0..ops.len() {
                let gab = mat_mul(&ops[a].g, &ops[b].g);
                product[a][b] = find(&gab).ok_or_else(|| Error::Internal(format!("{name}: point group not closed")))?;
            }
        }
        let dual = lattice.dual();
        let sym = Symmetry { lattice, ops, product, dual };
        // The coset representatives must compose modulo the lattice.
        for a in 0..sym.ops.len() {
            for b in 0..sym.ops.len() {
                if !sym.lattice.contains(sym.cocycle_shift(a, b)) {
                    return Err(Error::Internal(format!("{name}: coset representatives do not compose mod the lattice")));
                }
            }
        }
        Ok(sym)
    }

    pub fn lattice(&self) -> &Lattice {
        &self.lattice
    }
    /// Point-group operations, identity first.
    pub fn ops(&self) -> &[PixelOp] {
        &self.ops
    }
    /// `|G|`.
    pub fn order(&self) -> usize {
        self.ops.len()
    }
    /// `|Γ| = |Λ| |G|`.
    pub fn group_size(&self) -> usize {
        self.lattice.fiber_count() * self.ops.len()
    }
    /// Index of `g_a g_b`.
    pub fn product(&self, a: usize, b: usize) -> usize {
        self.product[a][b]
    }
    /// The lattice vector `k = g_a t_b + t_a − t_{ab}` with
    /// `γ_a γ_b = τ_k γ_{ab}`.
    pub fn cocycle_shift(&self, a: usize, b: usize) -> [i64; 2] {
        let (oa, ob, oab) = (&self.ops[a], &self.ops[b], &self.ops[self.product[a][b]]);
        let gt = mat_vec(&oa.g, ob.t);
        [gt[0] + oa.t[0] - oab.t[0], gt[1] + oa.t[1] - oab.t[1]]
    }

    /// The gather giving the fiber at `xi` of `π(γ_op) f` (MATH.md §4): for
    /// each `η` of [`Lattice::dual`], with `ζ = ξ + η`, the index of
    /// `gᵀζ mod n` and the phase `e^{−2πi ζ·t/n}`.
    ///
    /// `η = (j1 s1, j2 s2)` runs over a grid (`s = n / cell`), so `gᵀζ` and
    /// the integers `ζ_i t_i mod n_i` of the phase advance by fixed steps
    /// along it: additions with one conditional subtraction, no division
    /// per value, the same integers and the same floating-point phase as
    /// the direct formulas (the tests hold the two equal bit for bit).
    pub fn gather(&self, xi: Freq, op: usize) -> Gather {
        self.stepped_gather(xi, op, None)
    }

    /// `self.gather(xi, op).localised(self.lattice(), slot)` without the
    /// whole-torus indices: every value of a gather lies in one fiber `f`
    /// (`gᵀ` maps fibers to fibers), so the compact index is
    /// `slot[f] · d + k` with `k` the position of `gᵀζ − rep(f)` in
    /// [`Lattice::dual`], stepped along with `gᵀζ` in units of the grid.
    pub fn gather_local(&self, xi: Freq, op: usize, slot: &[usize]) -> Gather {
        self.stepped_gather(xi, op, Some(slot))
    }

    fn stepped_gather(&self, xi: Freq, op: usize, slot: Option<&[usize]>) -> Gather {
        let o = &self.ops[op];
        let l = &self.lattice;
        let n = l.torus();
        let cell = l.cell();
        let step = [n[0] / cell[0], n[1] / cell[1]];
        let wrap = |a: usize, b: usize, m: usize| if a + b >= m { a + b - m } else { a + b };
        let wrap2 = |a: Freq, b: Freq, m: [usize; 2]| [wrap(a[0], b[0], m[0]), wrap(a[1], b[1], m[1])];
        // `x t mod m` for the phase, and its step along each axis.
        let times = |x: usize, t: i64, m: usize| (x as i128 * t as i128).rem_euclid(m as i128) as usize;
        let (row_move, column_move) = (l.dual_action(&o.g, [step[0], 0]), l.dual_action(&o.g, [0, step[1]]));
        let (t_row_move, t_column_move) = (times(step[0], o.t[0], n[0]), times(step[1], o.t[1], n[1]));
        let translated = o.t != [0, 0];
        let mut index = Vec::with_capacity(self.dual.len());
        let mut phase = Vec::with_capacity(self.dual.len());
        let mut row = l.dual_action(&o.g, xi);
        let mut t_row = times(xi[0], o.t[0], n[0]);
        // Compact indices: the fiber's base and `gᵀζ − rep(f)` in grid
        // units (mod cell), with the moves in the same units.
        let in_grid = |v: Freq| [v[0] / step[0], v[1] / step[1]];
        let local = slot.map(|slot| {
            let f = l.fiber_of(row);
            (slot[f] * l.fiber_len(), in_grid(l.sub(row, l.fiber_rep(f))))
        });
        let (grid_row_move, grid_column_move) = (in_grid(row_move), in_grid(column_move));
        let (base, mut grid_row) = local.unwrap_or((0, [0, 0]));
        let half = cell[1] / 2;
        for j1 in 0..cell[0] {
            let mut at = row;
            let mut grid_at = grid_row;
            let mut t_column = times(xi[1], o.t[1], n[1]);
            for j2 in 0..cell[1] {
                if !l.is_centred() || (j1 + j2) % 2 == 0 {
                    index.push(match (local.is_some(), l.is_centred()) {
                        (false, _) => at[0] * n[1] + at[1],
                        (true, false) => base + grid_at[0] * cell[1] + grid_at[1],
                        (true, true) => base + grid_at[0] * half + grid_at[1] / 2,
                    });
                    phase.push(if translated {
                        let turns = (t_row as f64 / n[0] as f64 + t_column as f64 / n[1] as f64).fract();
                        Complex64::from_polar(1.0, -2.0 * std::f64::consts::PI * turns)
                    } else {
                        Complex64::new(1.0, 0.0)
                    });
                }
                at = wrap2(at, column_move, n);
                grid_at = wrap2(grid_at, grid_column_move, cell);
                t_column = wrap(t_column, t_column_move, n[1]);
            }
            row = wrap2(row, row_move, n);
            grid_row = wrap2(grid_row, grid_row_move, cell);
            t_row = wrap(t_row, t_row_move, n[0]);
        }
        Gather { index, phase }
    }

    /// [`Symmetry::gather`] by its direct formulas (the slow obvious reference).
    #[cfg(test)]
    pub(crate) fn gather_reference(&self, xi: Freq, op: usize) -> Gather {
        let o = &self.ops[op];
        let mut index = Vec::with_capacity(self.dual.len());
        let mut phase = Vec::with_capacity(self.dual.len());
        for &eta in &self.dual {
            let zeta = self.lattice.add(xi, eta);
            index.push(self.lattice.linear(self.lattice.dual_action(&o.g, zeta)));
            phase.push(if o.t == [0, 0] {
                Complex64::new(1.0, 0.0)
            } else {
                let turns = self.lattice.turns(zeta, o.t);
                Complex64::from_polar(1.0, -2.0 * std::f64::consts::PI * turns)
            });
        }
        Gather { index, phase }
    }

    /// The monomial unitary `U_h` of a stabiliser element on the fiber at
    /// `xi`: `(U_h v)_η = e^{−2πi(ξ+η)·t_h/n} v_{η'}`, `ξ+η' = g_hᵀ(ξ+η)`.
    pub fn fiber_unitary(&self, xi: Freq, op: usize) -> Result<crate::isotypic::Monomial> {
        let gather = self.gather(xi, op);
        let n2 = self.lattice.torus()[1];
        let mut perm = Vec::with_capacity(gather.index.len());
        for &i in &gather.index {
            let target = [i / n2, i % n2];
            let k = self
                .lattice
                .dual_index(self.lattice.sub(target, xi))
                .ok_or_else(|| Error::Internal("operation is not in the stabiliser of this fiber".into()))?;
            perm.push(k);
        }
        Ok(crate::isotypic::Monomial { perm, phase: gather.phase })
    }

    /// The orbits of the point group on the fibers, in order of their smallest fiber.
    pub fn orbits(&self) -> Vec<Orbit> {
        let count = self.lattice.fiber_count();
        let mut seen = vec![false; count];
        let mut out = Vec::new();
        for id in 0..count {
            if seen[id] {
                continue;
            }
            let rep = self.lattice.fiber_rep(id);
            let mut points: Vec<(usize, usize)> = Vec::new();
            let mut stabiliser = Vec::new();
            for (k, o) in self.ops.iter().enumerate() {
                let f = self.lattice.fiber_of(self.lattice.dual_action(&o.g, rep));
                if f == id {
                    stabiliser.push(k);
                }
                if !points.iter().any(|p| p.0 == f) {
                    points.push((f, k));
                }
            }
            for p in &points {
                seen[p.0] = true;
            }
            out.push(Orbit { rep, points, stabiliser });
        }
        out
    }
}

/// A limit on [`worker_threads`] set by [`set_thread_limit`] (0: none).
static THREAD_LIMIT: std::sync::atomic::AtomicUsize = std::sync::atomic::AtomicUsize::new(0);

/// Limits the threads of later fits in this process (0 removes the limit).
/// Results do not depend on it; benchmarks use it to compare one thread
/// with the single-threaded wasm build.
pub fn set_thread_limit(threads: usize) {
    THREAD_LIMIT.store(threads, std::sync::atomic::Ordering::Relaxed);
}

/// Threads for per-orbit work: the available cores (at most 8, or the
/// [`set_thread_limit`]), one on wasm (no threads there without
/// cross-origin isolation).
pub fn worker_threads() -> usize {
    if cfg!(target_arch = "wasm32") {
        return 1;
    }
    let cores = std::thread::available_parallelism().map_or(1, |n| n.get().min(8));
    match THREAD_LIMIT.load(std::sync::atomic::Ordering::Relaxed) {
        0 => cores,
        limit => cores.min(limit),
    }
}

/// Runs `work(k)` for `k in 0..count` on up to [`worker_threads`] threads
/// and hands each result to `consume(k, result)` on the calling thread (in
/// completion order; `work` must not depend on the order). Each `work(k)` is
/// computed by the same code whatever the thread count, so results are
/// bit-identical with one thread or many. At most about twice `threads`
/// results exist at once. `consume` returning an error stops the remaining
/// work and returns that error.
pub(crate) fn for_each_parallel<T: Send, E>(
    count: usize,
    work: impl Fn(usize) -> T + Sync,
    mut consume: impl FnMut(usize, T) -> std::result::Result<(), E>,
) -> std::result::Result<(), E> {
    let threads = worker_threads().min(count);
    if threads <= 1 {
        for k in 0..count {
            consume(k, work(k))?;
        }
        return Ok(());
    }
    use std::sync::atomic::{AtomicBool, AtomicUsize, Ordering};
    let next = AtomicUsize::new(0);
    let stop = AtomicBool::new(false);
    std::thread::scope(|scope| {
        // Bounded: at most `threads` finished results wait for `consume`
        // (a worker blocks until there is room), so results that are made
        // faster than they are consumed do not pile up in memory.
        let (sender, receiver) = std::sync::mpsc::sync_channel(threads);
        for _ in 0..threads {
            let sender = sender.clone();
            let (next, stop, work) = (&next, &stop, &work);
            scope.spawn(move || loop {
                let k = next.fetch_add(1, Ordering::Relaxed);
                if k >= count || stop.load(Ordering::Relaxed) {
                    break;
                }
                if sender.send((k, work(k))).is_err() {
                    break;
                }
            });
        }
        drop(sender);
        for (k, result) in receiver {
            if let Err(e) = consume(k, result) {
                stop.store(true, Ordering::Relaxed);
                return Err(e);
            }
        }
        Ok(())
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::plane_group::GroupSymbol;
    use crate::spectrum::fft2;
    use crate::stack::Image;

    /// `π(g,t) f (x) = f(g⁻¹(x − t))` computed in pixel space.
    fn act(f: &Image, op: &PixelOp) -> Image {
        let (n1, n2) = (f.height as i64, f.width as i64);
        let mut out = Image::zeros(f.height, f.width);
        for x1 in 0..n1 {
            for x2 in 0..n2 {
                // y = g x + t; out(y) = f(x)
                let y = mat_vec(&op.g, [x1, x2]);
                let y = [(y[0] + op.t[0]).rem_euclid(n1), (y[1] + op.t[1]).rem_euclid(n2)];
                out.pixels[(y[0] * n2 + y[1]) as usize] = f.at(x1 as usize, x2 as usize);
            }
        }
        out
    }

    #[test]
    fn gather_is_the_fiber_of_the_transformed_image() {
        // The Fourier action (MATH.md §4) checked against pixel space for every group.
        for symbol in GroupSymbol::ALL {
            let (n, cell) = if symbol.is_hexagonal() || matches!(symbol, GroupSymbol::P4 | GroupSymbol::P4m | GroupSymbol::P4g) {
                ([12, 12], [4, 4])
            } else {
                ([12, 8], [4, 4])
            };
            let sym = Symmetry::new(n, cell, &PlaneGroup::standard(symbol)).unwrap();
            let f = Image::new(n[0], n[1], (0..n[0] * n[1]).map(|i| ((i * 37 + 11) % 23) as f64).collect());
            let spec = fft2(&f);
            for (k, op) in sym.ops().iter().enumerate() {
                let moved = fft2(&act(&f, op));
                for fiber in 0..sym.lattice().fiber_count() {
                    let xi = sym.lattice().fiber_rep(fiber);
                    let v = sym.gather(xi, k).apply(&spec);
                    for (j, &eta) in sym.lattice().dual().iter().enumerate() {
                        let z = moved[sym.lattice().linear(sym.lattice().add(xi, eta))];
                        assert!((z - v[j]).norm() < 1e-9, "{symbol:?} op {k}");
                    }
                }
            }
        }
    }

    /// The stepped gather against the direct formulas, bit for bit: every
    /// group (centred, hexagonal and glide ones among them), every
    /// operation, every frequency of tori with one and several cells.
    #[test]
    fn gather_equals_its_direct_formulas() {
        for symbol in GroupSymbol::ALL {
            for (n, cell) in [([12, 12], [4, 4]), ([24, 24], [6, 6]), ([8, 8], [8, 8])] {
                let Ok(sym) = Symmetry::new(n, cell, &PlaneGroup::standard(symbol)) else { continue };
                for k in 0..sym.order() {
                    for i in 0..n[0] * n[1] {
                        let xi = [i / n[1], i % n[1]];
                        let (fast, slow) = (sym.gather(xi, k), sym.gather_reference(xi, k));
                        assert_eq!(fast.index, slow.index, "{symbol:?} op {k} at {xi:?}");
                        assert!(fast.phase.iter().zip(&slow.phase).all(|(a, b)| a == b), "{symbol:?} op {k} at {xi:?}");
                    }
                }
            }
        }
        // The compact indices against `localised`, fibers in a scrambled
        // slot order.
        for symbol in GroupSymbol::ALL {
            let Ok(sym) = Symmetry::new([24, 24], [6, 6], &PlaneGroup::standard(symbol)) else { continue };
            let count = sym.lattice().fiber_count();
            let slot: Vec<usize> = (0..count).map(|f| (f * 7 + 3) % count).collect();
            for k in 0..sym.order() {
                for i in 0..24 * 24 {
                    let xi = [i / 24, i % 24];
                    let (fast, slow) = (sym.gather_local(xi, k, &slot), sym.gather_reference(xi, k).localised(sym.lattice(), &slot));
                    assert_eq!(fast.index, slow.index, "{symbol:?} op {k} at {xi:?}");
                    assert!(fast.phase == slow.phase, "{symbol:?} op {k} at {xi:?}");
                }
            }
        }
        let pmg = Symmetry::new([16, 12], [8, 4], &PlaneGroup::standard(GroupSymbol::Pmg)).unwrap();
        for k in 0..pmg.order() {
            for i in 0..16 * 12 {
                let xi = [i / 12, i % 12];
                assert_eq!(pmg.gather(xi, k).index, pmg.gather_reference(xi, k).index);
                assert!(pmg.gather(xi, k).phase == pmg.gather_reference(xi, k).phase);
            }
        }
    }

    /// [`HalfFibers`] read through its gathers gives what the gather
    /// reads from the whole spectrum of a real image, bit for bit: every
    /// group (centred, hexagonal and glide ones among them, with and
    /// without `−I`), every operation, every frequency, on a spectrum with
    /// `f̂(−ξ) = conj f̂(ξ)` exactly and otherwise all values different; and
    /// it keeps every primary fiber once, at most about half the spectrum.
    #[test]
    fn half_fibers_read_what_the_whole_spectrum_holds() {
        for symbol in GroupSymbol::ALL {
            for (n, cell) in [([24, 24], [6, 6]), ([16, 16], [4, 4]), ([12, 20], [4, 4])] {
                let Ok(sym) = Symmetry::new(n, cell, &PlaneGroup::standard(symbol)) else { continue };
                let l = sym.lattice();
                let spectrum: Vec<Complex64> = (0..n[0] * n[1])
                    .map(|i| {
                        let j = l.linear(l.neg([i / n[1], i % n[1]]));
                        match i.cmp(&j) {
                            std::cmp::Ordering::Less => Complex64::new(i as f64, 0.25 + i as f64),
                            std::cmp::Ordering::Equal => Complex64::new(i as f64, 0.0),
                            std::cmp::Ordering::Greater => Complex64::new(j as f64, 0.25 + j as f64).conj(),
                        }
                    })
                    .collect();
                let half = HalfFibers::new(l);
                let kept = half.keep(l, &spectrum);
                let primary = (0..l.fiber_count()).filter(|&f| half.slot[f] != usize::MAX).count();
                let own_mirrors = (0..l.fiber_count()).filter(|&f| half.mirror[f] == f).count();
                assert_eq!(kept.len(), primary * l.fiber_len());
                assert_eq!(2 * primary, l.fiber_count() + own_mirrors, "{symbol:?}");
                for k in 0..sym.order() {
                    for i in 0..n[0] * n[1] {
                        let xi = [i / n[1], i % n[1]];
                        let whole = sym.gather(xi, k).apply(&spectrum);
                        let (g, conj) = half.gather(&sym, xi, k);
                        let local: Vec<Complex64> =
                            g.index.iter().zip(&g.phase).map(|(&j, &p)| p * if conj { kept[j].conj() } else { kept[j] }).collect();
                        assert!(whole == local, "{symbol:?} {n:?} op {k} at {xi:?}");
                    }
                }
            }
        }
    }

    #[test]
    fn orbit_stabiliser_counts() {
        // p4m on 16x16 with cell 4x4: 16 fibers; orbit sizes times stabiliser sizes = |G|.
        let sym = Symmetry::new([16, 16], [4, 4], &PlaneGroup::standard(GroupSymbol::P4m)).unwrap();
        let orbits = sym.orbits();
        let total: usize = orbits.iter().map(|o| o.points.len()).sum();
        assert_eq!(total, 16);
        for o in &orbits {
            assert_eq!(o.points.len() * o.stabiliser.len(), 8);
        }
        // ξ0 = 0 is fixed by the whole group
        assert_eq!(orbits[0].rep, [0, 0]);
        assert_eq!(orbits[0].stabiliser.len(), 8);
    }

    #[test]
    fn shape_errors_name_the_need() {
        let p4 = PlaneGroup::standard(GroupSymbol::P4);
        let msg = Symmetry::new([12, 8], [4, 4], &p4).unwrap_err().to_string();
        assert!(msg.contains("square images"), "{msg}");
        let pg = PlaneGroup::standard(GroupSymbol::Pg);
        let msg = Symmetry::new([12, 9], [4, 3], &pg).unwrap_err().to_string();
        assert!(msg.contains("must be even"), "{msg}");
    }
}
