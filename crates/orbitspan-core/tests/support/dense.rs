//! The dense finite-group method (MATH.md §3), written without any Fourier
//! analysis: Γ as explicit pixel permutations, the pooled `|T| x |T|`
//! covariance `C = Σ_γ Σ_i (π(γ)f_i)(π(γ)f_i)ᵀ`, isotypic components from a
//! random central element with complex weights, multiplicities from
//! characters (Serre, *Linear Representations of Finite Groups*, §2), and
//! the optimum keeping the top `L (dim ρ)²` eigenvalues per component.
//!
//! One file serves two users: the test oracle in `tests/dense_reference.rs`
//! and the benchmark `crates/orbitspan-bench` (included by path), which
//! times it against the fiber method. Cost grows like `|Γ| |T|² + |T|³`.

use nalgebra::{DMatrix, DVector};
use num_complex::Complex64;
use orbitspan_core::fiber::Symmetry;
use orbitspan_core::prng::SplitMix64;
use orbitspan_core::Image;

/// Γ as permutations `x ↦ γ(x)` of the row-major pixel indices.
pub fn group_permutations(sym: &Symmetry) -> Vec<Vec<usize>> {
    let [n1, n2] = sym.lattice().torus();
    let mut lattice_vectors = Vec::new();
    for k1 in 0..n1 as i64 {
        for k2 in 0..n2 as i64 {
            if sym.lattice().contains([k1, k2]) {
                lattice_vectors.push([k1, k2]);
            }
        }
    }
    let mut perms = Vec::new();
    for op in sym.ops() {
        for k in &lattice_vectors {
            let perm = (0..n1 * n2)
                .map(|x| {
                    let (x1, x2) = ((x / n2) as i64, (x % n2) as i64);
                    let y1 = (op.g[0][0] * x1 + op.g[0][1] * x2 + op.t[0] + k[0]).rem_euclid(n1 as i64);
                    let y2 = (op.g[1][0] * x1 + op.g[1][1] * x2 + op.t[1] + k[1]).rem_euclid(n2 as i64);
                    (y1 as usize) * n2 + y2 as usize
                })
                .collect::<Vec<_>>();
            perms.push(perm);
        }
    }
    perms
}

/// `π(γ) f`: `(π(γ)f)(γ(x)) = f(x)`.
pub fn act(perm: &[usize], f: &[f64]) -> DVector<f64> {
    let mut out = DVector::zeros(f.len());
    for (x, &y) in perm.iter().enumerate() {
        out[y] = f[x];
    }
    out
}

/// Optimal errors `E(1..=lmax)` by the dense finite-group method.
pub fn dense_errors(perms: &[Vec<usize>], images: &[Image], lmax: usize) -> Vec<f64> {
    let n = images[0].pixels.len();
    let mut c = DMatrix::<f64>::zeros(n, n);
    for p in perms {
        for img in images {
            let u = act(p, &img.pixels);
            c.ger(1.0, &u, &u, 1.0);
        }
    }
    let cz = c.map(|v| Complex64::new(v, 0.0));
    // A = Σ_γ w_γ P_γ with P_γ[γ(x), x] = 1; Z[x, y] = Σ_γ A[γ(x), γ(y)].
    let mut rng = SplitMix64(0x5eed);
    let mut a = DMatrix::<Complex64>::zeros(n, n);
    for p in perms {
        let w = Complex64::new(rng.between(-1.0, 1.0), rng.between(-1.0, 1.0));
        for x in 0..n {
            a[(p[x], x)] += w;
        }
    }
    let mut z = DMatrix::<Complex64>::zeros(n, n);
    for p in perms {
        for y in 0..n {
            for x in 0..n {
                z[(x, y)] += a[(p[x], p[y])];
            }
        }
    }
    let zh = (&z + z.adjoint()) * Complex64::new(0.5, 0.0);
    let eig = zh.symmetric_eigen();
    let mut idx: Vec<usize> = (0..n).collect();
    idx.sort_by(|&i, &j| eig.eigenvalues[i].total_cmp(&eig.eigenvalues[j]));
    let scale = eig.eigenvalues.iter().fold(0.0f64, |m, v| m.max(v.abs()));
    let mut clusters: Vec<Vec<usize>> = Vec::new();
    for &i in &idx {
        match clusters.last_mut() {
            Some(cl) if (eig.eigenvalues[i] - eig.eigenvalues[*cl.last().unwrap()]).abs() < 1e-7 * scale => cl.push(i),
            _ => clusters.push(vec![i]),
        }
    }
    let mut discarded = vec![0.0; lmax];
    for cl in clusters {
        let b = DMatrix::from_fn(n, cl.len(), |r, k| eig.eigenvectors[(r, cl[k])]);
        // χ_W(γ) = tr(Bᴴ P_γ B), m = sqrt(mean |χ|²), dim ρ = dim W / m.
        let mut sum_sq = 0.0;
        for p in perms {
            let mut chi = Complex64::new(0.0, 0.0);
            for k in 0..cl.len() {
                for x in 0..n {
                    chi += b[(p[x], k)].conj() * b[(x, k)];
                }
            }
            sum_sq += chi.norm_sqr();
        }
        let m = (sum_sq / perms.len() as f64).sqrt();
        assert!((m - m.round()).abs() < 1e-6, "multiplicity {m} not an integer");
        let dim_rho = cl.len() / m.round() as usize;
        assert_eq!(dim_rho * m.round() as usize, cl.len());
        let cw = b.adjoint() * &cz * &b;
        let mut ev: Vec<f64> = cw.symmetric_eigen().eigenvalues.iter().map(|v| v.max(0.0)).collect();
        ev.sort_by(|a, b| b.total_cmp(a));
        for l in 1..=lmax {
            let keep = l * dim_rho * dim_rho;
            discarded[l - 1] += ev.iter().skip(keep).sum::<f64>();
        }
    }
    discarded.iter().map(|d| d / perms.len() as f64).collect()
}
