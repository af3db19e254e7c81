//! Isotypic decomposition of a (projective) monomial unitary representation
//! of a finite group, without knowing its irreducible representations
//! (MATH.md §3–4, after Serre, *Linear Representations of Finite Groups*).
//!
//! For unitaries `U_h` (`h ∈ H`) a random central element
//! `Z = Σ_h U_hᴴ A U_h` with `A = Σ_h w_h U_h` and **complex** weights `w_h`
//! acts on each isotypic component `W` as one scalar; the eigenspaces of its
//! Hermitian part are the components. For each, `χ_W(h) = tr(P_W U_h)`, the
//! multiplicity is `m = sqrt(mean_h |χ_W(h)|²)` and the type dimension is
//! `s = dim W / m`; both must be integers, which is checked. With real weights
//! a complex type would merge with its conjugate and `m` would come out as
//! `√2` times an integer.

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
    fn inverse_perm(&self) -> Vec<usize> {
        let mut inv = vec![0; self.perm.len()];
        for (a, &p) in self.perm.iter().enumerate() {
            inv[p] = a;
        }
        inv
    }
}

/// One isotypic component: an orthonormal basis (columns) of `W`, the type
/// dimension `s` and the multiplicity `m` (`dim W = m s`).
#[derive(Clone, Debug)]
pub struct Block {
    pub basis: DMatrix<Complex64>,
    pub type_dim: usize,
    pub multiplicity: usize,
}

/// The isotypic components of the representation `h ↦ ops[h]` on `C^n`.
/// `ops` must be closed under products up to phases (a projective
/// representation) and contain the identity. Deterministic: fixed weights,
/// with a few fixed retries if an integrality check fails.
pub fn isotypic_blocks(n: usize, ops: &[Monomial]) -> Result<Vec<Block>> {
    if ops.len() <= 1 {
        return Ok(vec![Block { basis: DMatrix::identity(n, n), type_dim: 1, multiplicity: n }]);
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

fn try_blocks(n: usize, ops: &[Monomial], attempt: u64) -> std::result::Result<Vec<Block>, String> {
    let mut rng = SplitMix64(0x6f72_6269_7473_7061 ^ attempt.wrapping_mul(0x1234_5678_9abc_def1));
    let mut a = DMatrix::<Complex64>::zeros(n, n);
    for op in ops {
        let w = Complex64::new(rng.between(-1.0, 1.0), rng.between(-1.0, 1.0));
        for r in 0..n {
            a[(r, op.perm[r])] += w * op.phase[r];
        }
    }
    // Z = Σ_h U_hᴴ A U_h: (Uᴴ A U)[x, y] = conj(phase[p(x)]) A[p(x), p(y)] phase[p(y)], p = perm⁻¹.
    let mut z = DMatrix::<Complex64>::zeros(n, n);
    for op in ops {
        let inv = op.inverse_perm();
        for y in 0..n {
            let (py, cy) = (inv[y], op.phase[inv[y]]);
            for x in 0..n {
                let px = inv[x];
                z[(x, y)] += op.phase[px].conj() * a[(px, py)] * cy;
            }
        }
    }
    let zh = (&z + z.adjoint()) * Complex64::new(0.5, 0.0);
    let eig = nalgebra::SymmetricEigen::new(zh);
    let mut order: Vec<usize> = (0..n).collect();
    order.sort_by(|&i, &j| eig.eigenvalues[i].total_cmp(&eig.eigenvalues[j]));
    let scale = eig.eigenvalues.iter().fold(0.0f64, |m, v| m.max(v.abs())).max(1e-300);
    let tol = 1e-7 * scale;
    let mut clusters: Vec<Vec<usize>> = Vec::new();
    for &i in &order {
        match clusters.last_mut() {
            Some(c) if (eig.eigenvalues[i] - eig.eigenvalues[*c.last().unwrap()]).abs() <= tol => c.push(i),
            _ => clusters.push(vec![i]),
        }
    }
    let mut blocks = Vec::with_capacity(clusters.len());
    let mut covered = 0;
    for c in clusters {
        let basis = DMatrix::from_fn(n, c.len(), |r, k| eig.eigenvectors[(r, c[k])]);
        let mut sum_sq = 0.0;
        for op in ops {
            let mut chi = Complex64::new(0.0, 0.0);
            for k in 0..c.len() {
                for r in 0..n {
                    chi += basis[(r, k)].conj() * op.phase[r] * basis[(op.perm[r], k)];
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
