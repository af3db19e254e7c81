//! Band limits: Paley–Wiener restriction to a symmetric frequency set `Ω`
//! (MATH.md §6, arXiv:1501.03187).
//!
//! For `Ω` invariant under the dual action `ξ ↦ gᵀξ` and under `ξ ↦ −ξ`,
//! every subspace `S ⊂ V_Ω` has `E(F,S) = E(P_Ω F, S) + ||F − P_Ω F||²`, so
//! the optimum inside `V_Ω` is the unrestricted optimum of the band-limited
//! stack plus the energy outside the band.
//!
//! Choosing `Ω` with at most `M` frequencies to keep the most energy is a
//! 0/1 knapsack over frequency orbits; within one orbit size the best `k`
//! orbits are the `k` most energetic, so a dynamic programme over the few
//! distinct sizes is exact.

use crate::error::{Error, Result};
use crate::fiber::Symmetry;
use crate::lattice::Freq;
use crate::settings::BandSpec;
use num_complex::Complex64;

/// A frequency set `Ω` as a mask over the row-major spectrum.
#[derive(Clone, Debug, PartialEq)]
pub struct Band {
    pub mask: Vec<bool>,
}

impl Band {
    /// Number of frequencies in `Ω`.
    pub fn len(&self) -> usize {
        self.mask.iter().filter(|&&b| b).count()
    }
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }
    /// Zeroes a spectrum outside `Ω`; returns the removed energy `Σ_{ξ∉Ω} |f̂(ξ)|² / |T|`.
    pub fn restrict(&self, spectrum: &mut [Complex64]) -> f64 {
        let mut removed = 0.0;
        for (z, &keep) in spectrum.iter_mut().zip(&self.mask) {
            if !keep {
                removed += z.norm_sqr();
                *z = Complex64::new(0.0, 0.0);
            }
        }
        removed / spectrum.len() as f64
    }
}

/// Orbits of single frequencies under `ξ ↦ gᵀξ` (all `g ∈ G`) and `ξ ↦ −ξ`,
/// as lists of row-major indices, in order of their smallest index.
pub fn frequency_orbits(sym: &Symmetry) -> Vec<Vec<usize>> {
    let l = sym.lattice();
    let [n1, n2] = l.torus();
    let mut seen = vec![false; n1 * n2];
    let mut out = Vec::new();
    for start in 0..n1 * n2 {
        if seen[start] {
            continue;
        }
        let mut orbit = vec![start];
        seen[start] = true;
        let mut i = 0;
        while i < orbit.len() {
            let xi: Freq = [orbit[i] / n2, orbit[i] % n2];
            let images = sym.ops().iter().map(|o| l.dual_action(&o.g, xi)).chain(std::iter::once(l.neg(xi)));
            for y in images {
                let k = l.linear(y);
                if !seen[k] {
                    seen[k] = true;
                    orbit.push(k);
                }
            }
            i += 1;
        }
        out.push(orbit);
    }
    out
}

/// The squared length of a frequency in cycles per image, minimised over
/// the aliases `ξ + (j1 n1, j2 n2)`; in lattice coordinates of a hexagonal
/// lattice (60° basis) the metric is `(4/3)(ξ1² − ξ1ξ2 + ξ2²)`, which the
/// 60° rotation preserves.
pub fn frequency_norm_sq(xi: Freq, n: [usize; 2], hexagonal: bool) -> f64 {
    let mut best = f64::INFINITY;
    for j1 in -1i64..=1 {
        for j2 in -1i64..=1 {
            let a = xi[0] as i64 + j1 * n[0] as i64 - if xi[0] * 2 > n[0] { n[0] as i64 } else { 0 };
            let b = xi[1] as i64 + j2 * n[1] as i64 - if xi[1] * 2 > n[1] { n[1] as i64 } else { 0 };
            let (a, b) = (a as f64, b as f64);
            let q = if hexagonal { 4.0 / 3.0 * (a * a - a * b + b * b) } else { a * a + b * b };
            best = best.min(q);
        }
    }
    best
}

/// The stack's power per frequency, `Σ_i |f̂_i(ξ)|²` (images in order).
pub fn power(spectra: &[Vec<Complex64>]) -> Vec<f64> {
    let mut out = vec![0.0; spectra.first().map_or(0, Vec::len)];
    for s in spectra {
        for (p, z) in out.iter_mut().zip(s) {
            *p += z.norm_sqr();
        }
    }
    out
}

/// Chooses `Ω` for a band specification. `power` is the stack's
/// [`power`] per frequency, needed for the energy-optimal choice
/// (`Frequencies`; the disc does not read it).
pub fn select(sym: &Symmetry, spec: &BandSpec, power: &[f64], hexagonal: bool) -> Result<Band> {
    let pixels = sym.lattice().pixels();
    let orbits = frequency_orbits(sym);
    let mut mask = vec![false; pixels];
    match *spec {
        BandSpec::Frequencies(m) => {
            if m == 0 || m > pixels {
                return Err(Error::input(format!(
                    "band of {m} frequencies is impossible: choose between 1 and {pixels} (the number of pixels)"
                )));
            }
            if power.len() != pixels {
                return Err(Error::Internal(format!("band selection: power of {} frequencies for {pixels}", power.len())));
            }
            let energy: Vec<f64> = orbits.iter().map(|o| o.iter().map(|&k| power[k]).sum()).collect();
            for o in best_orbits(&orbits, &energy, m) {
                for &k in &orbits[o] {
                    mask[k] = true;
                }
            }
        }
        BandSpec::Radius(r) => {
            if !(r.is_finite() && r >= 0.0) {
                return Err(Error::input(format!("band radius {r} is not a non-negative number")));
            }
            let n = sym.lattice().torus();
            for o in &orbits {
                let min = o
                    .iter()
                    .map(|&k| frequency_norm_sq([k / n[1], k % n[1]], n, hexagonal))
                    .fold(f64::INFINITY, f64::min);
                if min <= r * r + 1e-9 {
                    for &k in o {
                        mask[k] = true;
                    }
                }
            }
        }
    }
    Ok(Band { mask })
}

/// Exact 0/1 knapsack: the set of orbits with total size `≤ budget` and the
/// largest total energy. Orbits are grouped by size; inside a size class the
/// best choice of `k` is the `k` largest, so the programme runs over classes
/// and counts. Ties are broken towards lower orbit index (deterministic).
pub fn best_orbits(orbits: &[Vec<usize>], energy: &[f64], budget: usize) -> Vec<usize> {
    let mut sizes: Vec<usize> = orbits.iter().map(Vec::len).collect();
    sizes.sort_unstable();
    sizes.dedup();
    // classes[c] = orbit indices of size sizes[c], most energetic first
    let classes: Vec<Vec<usize>> = sizes
        .iter()
        .map(|&s| {
            let mut v: Vec<usize> = (0..orbits.len()).filter(|&o| orbits[o].len() == s).collect();
            v.sort_by(|&a, &b| energy[b].total_cmp(&energy[a]).then(a.cmp(&b)));
            v
        })
        .collect();
    // best[c][b]: best energy using classes < c within budget b; choice[c][b]: count taken from class c-1
    let mut best = vec![vec![0.0f64; budget + 1]];
    let mut choice: Vec<Vec<usize>> = Vec::new();
    for (c, class) in classes.iter().enumerate() {
        let s = sizes[c];
        let mut prefix = vec![0.0];
        for &o in class {
            prefix.push(prefix.last().unwrap() + energy[o]);
        }
        let prev = best.last().unwrap();
        let mut cur = vec![0.0f64; budget + 1];
        let mut pick = vec![0usize; budget + 1];
        for b in 0..=budget {
            let kmax = class.len().min(b / s);
            let (mut bv, mut bk) = (f64::NEG_INFINITY, 0);
            for k in 0..=kmax {
                let v = prev[b - k * s] + prefix[k];
                if v > bv {
                    bv = v;
                    bk = k;
                }
            }
            cur[b] = bv;
            pick[b] = bk;
        }
        best.push(cur);
        choice.push(pick);
    }
    let mut chosen = Vec::new();
    let mut b = budget;
    for c in (0..classes.len()).rev() {
        let k = choice[c][b];
        chosen.extend_from_slice(&classes[c][..k]);
        b -= k * sizes[c];
    }
    chosen.sort_unstable();
    chosen
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn knapsack_matches_brute_force() {
        // Tiny instances: sizes 1, 2, 4 with pseudo-random energies; compare
        // with enumeration of all subsets.
        let mut rng = crate::prng::SplitMix64(7);
        for trial in 0..40 {
            let count = 3 + trial % 8;
            let orbits: Vec<Vec<usize>> = (0..count).map(|i| vec![0; [1, 2, 4][(i * 7 + trial) % 3]]).collect();
            let energy: Vec<f64> = (0..count).map(|_| rng.uniform()).collect();
            let total: usize = orbits.iter().map(Vec::len).sum();
            for budget in 0..=total {
                let got = best_orbits(&orbits, &energy, budget);
                let got_e: f64 = got.iter().map(|&o| energy[o]).sum();
                let got_size: usize = got.iter().map(|&o| orbits[o].len()).sum();
                assert!(got_size <= budget);
                let mut brute = 0.0f64;
                for mask in 0u32..(1 << count) {
                    let size: usize = (0..count).filter(|&i| mask >> i & 1 == 1).map(|i| orbits[i].len()).sum();
                    if size <= budget {
                        brute = brute.max((0..count).filter(|&i| mask >> i & 1 == 1).map(|i| energy[i]).sum());
                    }
                }
                assert!((got_e - brute).abs() < 1e-12, "trial {trial} budget {budget}: {got_e} vs {brute}");
            }
        }
    }

    #[test]
    fn hexagonal_metric_is_rotation_invariant() {
        let n = [12, 12];
        let g = [[0i64, -1], [1, 1]];
        let l = crate::lattice::Lattice::new(n, [3, 3], false).unwrap();
        for a in 0..12 {
            for b in 0..12 {
                let q = frequency_norm_sq([a, b], n, true);
                let q2 = frequency_norm_sq(l.dual_action(&g, [a, b]), n, true);
                assert!((q - q2).abs() < 1e-9, "{a},{b}: {q} {q2}");
            }
        }
    }
}
