//! Isotypic decomposition of a (projective) monomial unitary representation
//! of a finite group, without knowing its irreducible representations
//! (MATH.md §3–4, after Serre, *Linear Representations of Finite Groups*).
//!
//! For unitaries `U_h` (`h ∈ H`) a random central element
//! `Z = Σ_h U_hᴴ A U_h` with `A = Σ_h w_h U_h` and **complex** weights `w_h`
//! acts on each isotypic component `W` as one scalar; the eigenspaces of its
//! Hermitian part are the components. For each, `χ_W(h) = tr(P_W U_h)`, the
//! multiplicity is `m = sqrt(mean_h |χ_W(h)|²)` and the type dimension is
//! `s = dim W / m`; both must be integers, which is checked. The operators
//! are monomial, so `A` and `Z` are block diagonal over the orbits of `H` on
//! the coordinates: the eigen-decomposition is done per orbit (blocks of at
//! most `|H|`), not on the whole `n x n` matrix. With real weights
//! a complex type would merge with its conjugate and `m` would come out as
//! `√2` times an integer.

use crate::eigen;
use crate::error::{Error, Result};
use crate::prng::SplitMix64;
use nalgebra::DMatrix;
use num_complex::Complex64;

/// A monomial matrix: `(M x)_a = phase[a] · x[perm[a]]`, i.e. `M[a, perm[a]] = phase[a]`.
#[derive(Clone, Debug, PartialEq)]
pub struct Monomial {
    pub perm: Vec<usize>,
    pub phase: Vec<Complex64>,
}

impl Monomial {
    /// `M x`.
    pub fn apply(&self, x: &[Complex64]) -> Vec<Complex64> {
        self.perm.iter().zip(&self.phase).map(|(&p, &c)| c * x[p]).collect()
    }
    /// The dense matrix (for tests and small cases).
    pub fn to_dense(&self) -> DMatrix<Complex64> {
        let n = self.perm.len();
        let mut m = DMatrix::zeros(n, n);
        for a in 0..n {
            m[(a, self.perm[a])] = self.phase[a];
        }
        m
    }
}

/// One isotypic component: an orthonormal basis (columns) of `W`, the type
/// dimension `s` and the multiplicity `m` (`dim W = m s`).
#[derive(Clone, Debug)]
pub struct Block {
    pub basis: SparseBasis,
    pub type_dim: usize,
    pub multiplicity: usize,
}

/// A block's basis `B` by its nonzero entries. Each basis vector is made on
/// one orbit of the group on the coordinates (at most `|H|` of them, see
/// [`isotypic_blocks`]) and is zero elsewhere, so products with `B` cost
/// `|H|` (or `|H|²`) operations per entry instead of `n`, and the basis of
/// a block holds about `|H| dim W` numbers, not `n dim W`.
#[derive(Clone, Debug)]
pub struct SparseBasis {
    rows: usize,
    columns: Vec<Vec<(usize, Complex64)>>,
}

impl SparseBasis {
    /// The identity of `C^n`.
    fn identity(n: usize) -> SparseBasis {
        SparseBasis { rows: n, columns: (0..n).map(|a| vec![(a, Complex64::new(1.0, 0.0))]).collect() }
    }
    /// The number of basis vectors.
    pub fn dim(&self) -> usize {
        self.columns.len()
    }
    /// The basis as a dense `n x dim` matrix (for tests and small cases).
    pub fn to_dense(&self) -> DMatrix<Complex64> {
        let mut out = DMatrix::zeros(self.rows, self.columns.len());
        for (c, entries) in self.columns.iter().enumerate() {
            for &(a, v) in entries {
                out[(a, c)] = v;
            }
        }
        out
    }
    /// Divides each basis vector by the phase of its largest entry, so a
    /// vector that is a real vector times a phase becomes real; `false`
    /// (the basis then partly changed) when an entry keeps an imaginary
    /// part above `tol`. The imaginary parts left (at most `tol`) are set
    /// to zero.
    pub fn make_real(&mut self, tol: f64) -> bool {
        for entries in &mut self.columns {
            let Some(largest) = entries.iter().map(|e| e.1).max_by(|a, b| a.norm().total_cmp(&b.norm())) else {
                continue;
            };
            let unphase = largest.conj() / largest.norm();
            for (_, v) in entries.iter_mut() {
                let z = *v * unphase;
                if z.im.abs() > tol {
                    return false;
                }
                *v = Complex64::new(z.re, 0.0);
            }
        }
        true
    }
    /// `Bᴴ X B` for an `n x n` matrix `X`.
    pub fn compress(&self, x: &DMatrix<Complex64>) -> DMatrix<Complex64> {
        let k = self.columns.len();
        DMatrix::from_fn(k, k, |i, j| {
            let mut sum = Complex64::new(0.0, 0.0);
            for &(a, u) in &self.columns[i] {
                let mut row = Complex64::new(0.0, 0.0);
                for &(b, w) in &self.columns[j] {
                    row += x[(a, b)] * w;
                }
                sum += u.conj() * row;
            }
            sum
        })
    }
    /// `Bᵀ X B` for a real `n x n` `X` and a basis with real entries (their
    /// imaginary parts are not read).
    pub fn compress_real(&self, x: &DMatrix<f64>) -> DMatrix<f64> {
        let k = self.columns.len();
        DMatrix::from_fn(k, k, |i, j| {
            let mut sum = 0.0;
            for &(a, u) in &self.columns[i] {
                let mut row = 0.0;
                for &(b, w) in &self.columns[j] {
                    row += x[(a, b)] * w.re;
                }
                sum += u.re * row;
            }
            sum
        })
    }
    /// `B C` for a real `C` and a basis with real entries (imaginary parts
    /// not read).
    pub fn expand_real(&self, c: &DMatrix<f64>) -> DMatrix<f64> {
        self.expand_by(c, |u| u.re)
    }
    /// `Bᵀ U` for a real `U` (`n` rows) and a basis with real entries
    /// (imaginary parts not read): row `i` combines the rows of `U` that
    /// basis vector `i` holds.
    pub fn adjoint_times_real(&self, u: &DMatrix<f64>) -> DMatrix<f64> {
        assert_eq!(u.nrows(), self.rows, "Bᵀ U needs U with {} rows", self.rows);
        let mut out = DMatrix::zeros(self.columns.len(), u.ncols());
        for (c, column) in u.column_iter().enumerate() {
            for (i, entries) in self.columns.iter().enumerate() {
                out[(i, c)] = entries.iter().map(|&(a, w)| w.re * column[a]).sum();
            }
        }
        out
    }
    /// `Y B` for `Y = A + iB` given by its real and imaginary parts
    /// (`n` rows each), returned the same way.
    pub fn times_parts(&self, a: &DMatrix<f64>, b: &DMatrix<f64>) -> (DMatrix<f64>, DMatrix<f64>) {
        assert_eq!(a.ncols(), self.rows, "Y B needs Y with {} columns", self.rows);
        let (mut re, mut im) = (DMatrix::zeros(a.nrows(), self.columns.len()), DMatrix::zeros(a.nrows(), self.columns.len()));
        for (i, entries) in self.columns.iter().enumerate() {
            for &(k, u) in entries {
                let (ya, yb) = (a.column(k), b.column(k));
                re.column_mut(i).axpy(u.re, &ya, 1.0);
                re.column_mut(i).axpy(-u.im, &yb, 1.0);
                im.column_mut(i).axpy(u.im, &ya, 1.0);
                im.column_mut(i).axpy(u.re, &yb, 1.0);
            }
        }
        (re, im)
    }
    /// `B C` for a matrix `C` with one row per basis vector.
    pub fn expand(&self, c: &DMatrix<Complex64>) -> DMatrix<Complex64> {
        self.expand_by(c, |u| u)
    }
    /// `B C` with the basis entries read through `entry`.
    fn expand_by<T: nalgebra::ComplexField + Copy>(
        &self,
        c: &DMatrix<T>,
        entry: impl Fn(Complex64) -> T,
    ) -> DMatrix<T> {
        assert_eq!(c.nrows(), self.columns.len(), "coefficients for {} basis vectors", self.columns.len());
        let mut out = DMatrix::zeros(self.rows, c.ncols());
        for (col, mut target) in out.column_iter_mut().enumerate() {
            for (i, entries) in self.columns.iter().enumerate() {
                let z = c[(i, col)];
                for &(a, u) in entries {
                    target[a] += entry(u) * z;
                }
            }
        }
        out
    }
}

/// The isotypic components of the representation `h ↦ ops[h]` on `C^n`.
/// `ops` must be closed under products up to phases (a projective
/// representation) and contain the identity. Deterministic: fixed weights,
/// with a few fixed retries if an integrality check fails.
pub fn isotypic_blocks(n: usize, ops: &[Monomial]) -> Result<Vec<Block>> {
    if ops.len() <= 1 {
        return Ok(vec![Block { basis: SparseBasis::identity(n), type_dim: 1, multiplicity: n }]);
    }
    let mut last = String::new();
    for attempt in 0..6u64 {
        match try_blocks(n, ops, attempt) {
            Ok(b) => return Ok(b),
            Err(e) => last = e,
        }
    }
    Err(Error::Internal(format!("isotypic decomposition failed: {last}")))
}

/// The orbits of the group on the coordinates (`a ~ perm_h[a]`): each spans
/// an invariant subspace, so `A` and `Z` below are block diagonal with one
/// block per coordinate orbit (at most `|H|` coordinates each), and their
/// eigen-decompositions are those of the small blocks.
fn coordinate_orbits(n: usize, ops: &[Monomial]) -> Vec<Vec<usize>> {
    let mut root: Vec<usize> = (0..n).collect();
    fn find(root: &mut [usize], mut a: usize) -> usize {
        while root[a] != a {
            root[a] = root[root[a]];
            a = root[a];
        }
        a
    }
    for op in ops {
        for a in 0..n {
            let (x, y) = (find(&mut root, a), find(&mut root, op.perm[a]));
            if x != y {
                root[x.max(y)] = x.min(y);
            }
        }
    }
    let mut members: Vec<Vec<usize>> = vec![Vec::new(); n];
    for a in 0..n {
        let r = find(&mut root, a);
        members[r].push(a);
    }
    members.into_iter().filter(|m| !m.is_empty()).collect()
}

fn try_blocks(n: usize, ops: &[Monomial], attempt: u64) -> std::result::Result<Vec<Block>, String> {
    let mut rng = SplitMix64(0x6f72_6269_7473_7061 ^ attempt.wrapping_mul(0x1234_5678_9abc_def1));
    let weights: Vec<Complex64> = ops.iter().map(|_| Complex64::new(rng.between(-1.0, 1.0), rng.between(-1.0, 1.0))).collect();
    // Per coordinate orbit S: A_S = Σ_h w_h U_h and Z_S = Σ_h U_hᴴ A_S U_h on S;
    // eigenpairs (value, vector on S) of the Hermitian part of Z_S.
    let orbits = coordinate_orbits(n, ops);
    let mut pairs: Vec<(f64, usize, Vec<Complex64>)> = Vec::with_capacity(n);
    let mut position = vec![0usize; n];
    for (o, orbit) in orbits.iter().enumerate() {
        let k = orbit.len();
        for (i, &a) in orbit.iter().enumerate() {
            position[a] = i;
        }
        let mut a = DMatrix::<Complex64>::zeros(k, k);
        for (op, &w) in ops.iter().zip(&weights) {
            for (i, &r) in orbit.iter().enumerate() {
                a[(i, position[op.perm[r]])] += w * op.phase[r];
            }
        }
        // (Uᴴ A U)[x, y] = conj(phase[p(x)]) A[p(x), p(y)] phase[p(y)], p = perm⁻¹.
        let mut z = DMatrix::<Complex64>::zeros(k, k);
        for op in ops {
            let mut inv = vec![0usize; k];
            for (i, &r) in orbit.iter().enumerate() {
                inv[position[op.perm[r]]] = i;
            }
            for y in 0..k {
                let py = inv[y];
                let cy = op.phase[orbit[py]];
                for x in 0..k {
                    let px = inv[x];
                    z[(x, y)] += op.phase[orbit[px]].conj() * a[(px, py)] * cy;
                }
            }
        }
        let zh = (&z + z.adjoint()) * Complex64::new(0.5, 0.0);
        let (values, vectors) = eigen::hermitian(zh);
        for e in 0..k {
            pairs.push((values[e], o, vectors.column(e).iter().copied().collect()));
        }
    }
    pairs.sort_by(|p, q| p.0.total_cmp(&q.0));
    let scale = pairs.iter().fold(0.0f64, |m, p| m.max(p.0.abs())).max(1e-300);
    let tol = 1e-7 * scale;
    let mut clusters: Vec<Vec<usize>> = Vec::new();
    for i in 0..pairs.len() {
        match clusters.last_mut() {
            Some(c) if (pairs[i].0 - pairs[*c.last().unwrap()].0).abs() <= tol => c.push(i),
            _ => clusters.push(vec![i]),
        }
    }
    // Each eigenvector lives on its coordinate orbit: its nonzero entries.
    let eig_vectors = |c: &[usize]| SparseBasis {
        rows: n,
        columns: c
            .iter()
            .map(|&i| orbits[pairs[i].1].iter().zip(&pairs[i].2).filter(|(_, v)| **v != Complex64::new(0.0, 0.0)).map(|(&r, &v)| (r, v)).collect())
            .collect(),
    };
    let mut blocks = Vec::with_capacity(clusters.len());
    let mut covered = 0;
    for c in clusters {
        let basis = eig_vectors(&c);
        let mut sum_sq = 0.0;
        for op in ops {
            // χ(h) = Σ_k b_kᴴ U_h b_k, with b_k read on its coordinate
            // orbit (which U_h maps to itself).
            let mut chi = Complex64::new(0.0, 0.0);
            for &i in &c {
                let (orbit, v) = (&orbits[pairs[i].1], &pairs[i].2);
                for (j, &r) in orbit.iter().enumerate() {
                    chi += v[j].conj() * op.phase[r] * v[position[op.perm[r]]];
                }
            }
            sum_sq += chi.norm_sqr();
        }
        let m = (sum_sq / ops.len() as f64).sqrt();
        let m_int = m.round();
        if m_int < 1.0 || (m - m_int).abs() > 1e-6 * m_int.max(1.0) {
            return Err(format!("multiplicity {m} is not an integer (component of dimension {})", c.len()));
        }
        let m_int = m_int as usize;
        if c.len() % m_int != 0 {
            return Err(format!("dimension {} is not a multiple of multiplicity {m_int}", c.len()));
        }
        covered += c.len();
        blocks.push(Block { basis, type_dim: c.len() / m_int, multiplicity: m_int });
    }
    // Σ s² over the types present can not exceed |H| (projective regular representation).
    let types_sq: usize = blocks.iter().map(|b| b.type_dim * b.type_dim).sum();
    if covered != n || types_sq > ops.len() {
        return Err(format!("inconsistent decomposition: Σ s² = {types_sq} > |H| = {}", ops.len()));
    }
    Ok(blocks)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn cyclic_shift(n: usize, k: usize) -> Monomial {
        Monomial { perm: (0..n).map(|a| (a + k) % n).collect(), phase: vec![Complex64::new(1.0, 0.0); n] }
    }

    #[test]
    fn regular_representation_of_cyclic_group_splits_into_characters() {
        // Z_4 acting on C^4 by cyclic shifts: 4 one-dimensional complex types,
        // each once (Serre §2.4: the regular representation contains each
        // irreducible dim ρ times). Two of them are complex (i, -i): real
        // weights would merge them.
        let ops: Vec<_> = (0..4).map(|k| cyclic_shift(4, k)).collect();
        let blocks = isotypic_blocks(4, &ops).unwrap();
        assert_eq!(blocks.len(), 4);
        for b in &blocks {
            assert_eq!((b.type_dim, b.multiplicity), (1, 1));
        }
    }

    #[test]
    fn components_of_fiber_actions_are_invariant_and_complete() {
        // The stabiliser actions on Fourier fibers of several groups: the
        // projectors P_W = B Bᴴ sum to the identity, commute with every U_h,
        // and dim W = multiplicity x type dimension.
        use crate::fiber::Symmetry;
        use crate::plane_group::{GroupSymbol, PlaneGroup};
        for (symbol, cell) in [(GroupSymbol::P4m, 4), (GroupSymbol::P4g, 4), (GroupSymbol::P6m, 6), (GroupSymbol::Cmm, 4), (GroupSymbol::P3m1, 6)] {
            let sym = Symmetry::new([4 * cell, 4 * cell], [cell, cell], &PlaneGroup::standard(symbol)).unwrap();
            for orbit in sym.orbits().iter().filter(|o| o.stabiliser.len() > 1) {
                let ops: Vec<Monomial> = orbit.stabiliser.iter().map(|&h| sym.fiber_unitary(orbit.rep, h).unwrap()).collect();
                let n = ops[0].perm.len();
                let blocks = isotypic_blocks(n, &ops).unwrap();
                let mut sum = DMatrix::<Complex64>::zeros(n, n);
                for b in &blocks {
                    assert_eq!(b.basis.dim(), b.type_dim * b.multiplicity);
                    let basis = b.basis.to_dense();
                    let p = &basis * basis.adjoint();
                    for op in &ops {
                        let u = op.to_dense();
                        assert!((&p * &u - &u * &p).norm() < 1e-9, "{symbol:?} at {:?}: not invariant", orbit.rep);
                    }
                    sum += p;
                }
                assert!((sum - DMatrix::<Complex64>::identity(n, n)).norm() < 1e-9, "{symbol:?} at {:?}: not complete", orbit.rep);
            }
        }
    }

    /// [`SparseBasis`] products against the dense ones (the slow obvious
    /// reference) on the stabiliser actions of several groups' fibers, and
    /// each basis vector held on at most `|H|` coordinates.
    #[test]
    fn sparse_products_equal_the_dense_ones() {
        use crate::fiber::Symmetry;
        use crate::plane_group::{GroupSymbol, PlaneGroup};
        let mut rng = SplitMix64(3);
        let mut random = |r: usize, c: usize| DMatrix::<Complex64>::from_fn(r, c, |_, _| Complex64::new(rng.between(-1.0, 1.0), rng.between(-1.0, 1.0)));
        let mut checked = 0;
        for (symbol, cell) in [(GroupSymbol::P4m, 4), (GroupSymbol::P4g, 4), (GroupSymbol::P6m, 6), (GroupSymbol::Pmm, 4), (GroupSymbol::P3m1, 6)] {
            let sym = Symmetry::new([4 * cell, 4 * cell], [cell, cell], &PlaneGroup::standard(symbol)).unwrap();
            for orbit in sym.orbits().iter().filter(|o| o.stabiliser.len() > 1) {
                let ops: Vec<Monomial> = orbit.stabiliser.iter().map(|&h| sym.fiber_unitary(orbit.rep, h).unwrap()).collect();
                let n = ops[0].perm.len();
                for b in isotypic_blocks(n, &ops).unwrap() {
                    let sparse = &b.basis;
                    assert!(sparse.columns.iter().all(|c| !c.is_empty() && c.len() <= ops.len()), "{symbol:?}: a basis vector on more than |H| coordinates");
                    let basis = b.basis.to_dense();
                    let x = random(n, n);
                    let dense = basis.adjoint() * &x * &basis;
                    assert!((sparse.compress(&x) - &dense).norm() < 1e-12 * dense.norm(), "{symbol:?} at {:?}: compress", orbit.rep);
                    let c = random(basis.ncols(), 3);
                    let dense = &basis * &c;
                    assert!((sparse.expand(&c) - &dense).norm() < 1e-12 * dense.norm(), "{symbol:?} at {:?}: expand", orbit.rep);
                    let y = random(5, n);
                    let dense = &y * &basis;
                    let (re, im) = sparse.times_parts(&y.map(|z| z.re), &y.map(|z| z.im));
                    let got = re.zip_map(&im, Complex64::new);
                    assert!((got - &dense).norm() < 1e-12 * dense.norm(), "{symbol:?} at {:?}: times_parts", orbit.rep);
                    // The real forms read the real parts of the basis only.
                    let real_basis = basis.map(|z| z.re);
                    let u = random(n, 4).map(|z| z.re);
                    let dense = real_basis.transpose() * &u;
                    assert!((sparse.adjoint_times_real(&u) - &dense).norm() < 1e-12 * dense.norm(), "{symbol:?} at {:?}: adjoint_times_real", orbit.rep);
                    let c = random(basis.ncols(), 3).map(|z| z.re);
                    let dense = &real_basis * &c;
                    assert!((sparse.expand_real(&c) - &dense).norm() < 1e-12 * dense.norm(), "{symbol:?} at {:?}: expand_real", orbit.rep);
                    checked += 1;
                }
            }
        }
        assert!(checked > 20, "{checked} blocks");
    }

    #[test]
    fn dihedral_group_on_square_vertices() {
        // D4 (order 8) permuting the 4 vertices of a square: the permutation
        // character is (4,0,0,0,0,2,2 …); it decomposes as trivial + sign-type
        // 1-dim + the 2-dim irreducible (from memory: standard character table
        // of D4). So: three components, one of type dimension 2.
        let rot = Monomial { perm: vec![1, 2, 3, 0], phase: vec![Complex64::new(1.0, 0.0); 4] };
        let refl = Monomial { perm: vec![0, 3, 2, 1], phase: vec![Complex64::new(1.0, 0.0); 4] };
        let mut ops = vec![cyclic_shift(4, 0)];
        let compose = |a: &Monomial, b: &Monomial| Monomial {
            perm: (0..4).map(|i| b.perm[a.perm[i]]).collect(),
            phase: vec![Complex64::new(1.0, 0.0); 4],
        };
        while ops.len() < 8 {
            let mut next = ops.clone();
            for o in &ops {
                for g in [&rot, &refl] {
                    let c = compose(o, g);
                    if !next.iter().any(|x| x.perm == c.perm) {
                        next.push(c);
                    }
                }
            }
            ops = next;
        }
        let blocks = isotypic_blocks(4, &ops).unwrap();
        let mut dims: Vec<(usize, usize)> = blocks.iter().map(|b| (b.type_dim, b.multiplicity)).collect();
        dims.sort();
        assert_eq!(dims, vec![(1, 1), (1, 1), (2, 1)]);
    }
}
