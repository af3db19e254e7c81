//! The stack's spectra kept by orbit pair, half of them.
//!
//! The fit reads each image's spectrum only through the fibers of one orbit
//! pair at a time ([`crate::fit::orbit_pairs`]: an orbit `O` with `−O`). The
//! images are real, so `f̂(−ξ) = conj f̂(ξ)`: the fiber at `−ξ` is the
//! conjugate of the fiber at `ξ`, reordered. A pair's points therefore come
//! in mirror images (`ξ_j` and `−ξ_j` are both points of the pair), and only
//! the *primary* point of each mirror couple (the smaller fiber index; a
//! fiber that is its own mirror is primary) is kept. Kept this way the
//! spectra take about half the memory of whole complex spectra, and a task
//! for another worker ([`crate::tasks`]) carries half the bytes.
//!
//! [`expand`] rebuilds a pair's fibers for every image in slot order (the
//! order of the pair's points, first orbit first), which is what the
//! per-pair solver reads through [`crate::fiber::Symmetry::gather_local`].

use crate::error::{Error, Result};
use crate::fiber::{Orbit, Symmetry};
use crate::spectrum::negative_index;
use num_complex::Complex64;
use std::sync::Mutex;

/// The fibers of a pair's points, in slot order (first orbit's points,
/// then the conjugate's).
pub(crate) fn pair_points(orbits: &[Orbit], pair: &[usize]) -> Vec<usize> {
    pair.iter().flat_map(|&o| orbits[o].points.iter().map(|&(fiber, _)| fiber)).collect()
}

/// Per point of the pair (slot order), whether it is primary
/// ([`crate::lattice::Lattice::is_primary`]).
pub(crate) fn primary(sym: &Symmetry, points: &[usize]) -> Vec<bool> {
    points.iter().map(|&f| sym.lattice().is_primary(f)).collect()
}

/// Values per image that a pair keeps: `d` per primary point.
pub(crate) fn kept_len(sym: &Symmetry, orbits: &[Orbit], pair: &[usize]) -> usize {
    primary(sym, &pair_points(orbits, pair)).iter().filter(|&&p| p).count() * sym.lattice().fiber_len()
}

/// Every pair's kept fibers of every image, filled image by image in any
/// order (each image has its own place).
pub(crate) struct PairFibers {
    /// Per pair, image-major: `images x kept_len` values.
    data: Vec<Vec<Complex64>>,
    /// Per pair, the spectrum indices of its kept values and of their
    /// negatives (while filling).
    indices: Vec<Vec<[u32; 2]>>,
    images: usize,
}

impl PairFibers {
    /// Zeroed storage for `pairs` and `images` images (allocated exactly
    /// once: no growth by doubling, no copies while filling).
    pub fn new(sym: &Symmetry, orbits: &[Orbit], pairs: &[Vec<usize>], images: usize) -> PairFibers {
        let l = sym.lattice();
        let dual = l.dual();
        let [n1, n2] = l.torus();
        let indices: Vec<Vec<[u32; 2]>> = pairs
            .iter()
            .map(|pair| {
                let points = pair_points(orbits, pair);
                let keep = primary(sym, &points);
                points
                    .iter()
                    .zip(keep)
                    .filter(|(_, k)| *k)
                    .flat_map(|(&f, _)| {
                        let rep = l.fiber_rep(f);
                        dual.iter().map(move |&eta| {
                            let i = l.linear(l.add(rep, eta));
                            [i as u32, negative_index(i, n1, n2) as u32]
                        })
                    })
                    .collect()
            })
            .collect();
        PairFibers { data: indices.iter().map(|i| vec![Complex64::new(0.0, 0.0); i.len() * images]).collect(), indices, images }
    }

    /// Stores image `image`'s kept values from its (whole) spectrum.
    #[cfg(test)]
    pub fn set(&mut self, image: usize, spectrum: &[Complex64]) {
        self.places().swap_remove(image).fill(|i, _| spectrum[i]);
    }

    /// Each image's own place (every pair's slice for that image), so that
    /// images can be stored at once from several threads.
    pub fn places(&mut self) -> Vec<ImagePlace<'_>> {
        let mut places: Vec<ImagePlace<'_>> = (0..self.images).map(|_| ImagePlace { slices: Vec::with_capacity(self.data.len()), indices: &self.indices }).collect();
        for (data, indices) in self.data.iter_mut().zip(&self.indices) {
            if indices.is_empty() {
                continue;
            }
            for (place, slice) in places.iter_mut().zip(data.chunks_mut(indices.len())) {
                place.slices.push(slice);
            }
        }
        places
    }

    /// Ends the filling (drops the index lists).
    pub fn finish_filling(&mut self) {
        self.indices = Vec::new();
    }

    /// Every pair's kept values, moved out (this is left empty), each to
    /// be taken by the thread that solves the pair and dropped once solved.
    pub fn take_pairs(&mut self) -> Vec<Mutex<Vec<Complex64>>> {
        std::mem::take(&mut self.data).into_iter().map(Mutex::new).collect()
    }

    /// Drops pair `p`'s kept values (once they are no longer needed).
    pub fn drop_pair(&mut self, p: usize) {
        self.data[p] = Vec::new();
    }

    /// Pair `p`'s kept values, image-major.
    pub fn pair(&self, p: usize) -> &[Complex64] {
        &self.data[p]
    }
}

/// One image's kept values in every pair, to be filled.
pub(crate) struct ImagePlace<'a> {
    /// Per pair with kept values, this image's slice.
    slices: Vec<&'a mut [Complex64]>,
    indices: &'a [Vec<[u32; 2]>],
}

impl ImagePlace<'_> {
    /// Stores the image's kept values, `value(i, j)` being its spectrum at
    /// row-major index `i` (`j` the index of the negative frequency).
    pub fn fill(self, value: impl Fn(usize, usize) -> Complex64) {
        for (slice, indices) in self.slices.into_iter().zip(self.indices.iter().filter(|i| !i.is_empty())) {
            for (d, &[i, j]) in slice.iter_mut().zip(indices) {
                *d = value(i as usize, j as usize);
            }
        }
    }
}

/// One buffer per image holding every fiber of the pair in slot order (`d`
/// values per point, in the order of [`crate::lattice::Lattice::dual`]),
/// from the kept values `kept` (image-major, as [`PairFibers::pair`]):
/// a point that is not primary reads `f̂(ξ + η) = conj f̂(−ξ − η)` from its
/// mirror.
pub(crate) fn expand(sym: &Symmetry, orbits: &[Orbit], pair: &[usize], kept: &[Complex64], images: usize) -> Result<Vec<Vec<Complex64>>> {
    let l = sym.lattice();
    let d = l.fiber_len();
    let dual = l.dual();
    let points = pair_points(orbits, pair);
    let keep = primary(sym, &points);
    // Per point, its position among the kept points.
    let mut rank = vec![usize::MAX; points.len()];
    let mut count = 0;
    for (j, &k) in keep.iter().enumerate() {
        if k {
            rank[j] = count;
            count += 1;
        }
    }
    let per_image = count * d;
    if kept.len() != per_image * images {
        return Err(Error::Internal(format!(
            "orbit pair {pair:?}: {} kept fiber values for {images} images of {per_image}",
            kept.len()
        )));
    }
    // Where each value comes from: (kept position, conjugate?).
    let mut source = Vec::with_capacity(points.len() * d);
    for (j, &f) in points.iter().enumerate() {
        if keep[j] {
            source.extend((0..d).map(|k| (rank[j] * d + k, false)));
            continue;
        }
        let m = l.mirror_fiber(f);
        let jm = points
            .iter()
            .position(|&g| g == m)
            .ok_or_else(|| Error::Internal(format!("orbit pair {pair:?}: the mirror of fiber {f} is not in the pair")))?;
        let positions = l.mirror_positions(f, &dual).ok_or_else(|| Error::Internal(format!("fiber {m} does not hold the mirror of fiber {f}")))?;
        source.extend(positions.into_iter().map(|k| (rank[jm] * d + k, true)));
    }
    Ok((0..images)
        .map(|i| {
            let image = &kept[i * per_image..(i + 1) * per_image];
            source.iter().map(|&(at, conj)| if conj { image[at].conj() } else { image[at] }).collect()
        })
        .collect())
}

thread_local! {
    /// Per thread: fiber → slot in the pair being solved (`usize::MAX`
    /// elsewhere), reused from pair to pair.
    static SLOTS: std::cell::RefCell<Vec<usize>> = const { std::cell::RefCell::new(Vec::new()) };
}

/// Runs `f` with the slot of every fiber of the pair (slot order, see
/// [`pair_points`]) set and every other fiber at `usize::MAX`.
pub(crate) fn with_slots<T>(sym: &Symmetry, orbits: &[Orbit], pair: &[usize], f: impl FnOnce(&[usize]) -> T) -> T {
    let points = pair_points(orbits, pair);
    SLOTS.with(|slots| {
        let mut slot = slots.borrow_mut();
        let count = sym.lattice().fiber_count();
        if slot.len() != count {
            *slot = vec![usize::MAX; count];
        }
        for (j, &fiber) in points.iter().enumerate() {
            slot[fiber] = j;
        }
        let out = f(&slot);
        for &fiber in &points {
            slot[fiber] = usize::MAX;
        }
        out
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::fit::orbit_pairs;
    use crate::plane_group::{GroupSymbol, PlaneGroup};
    use crate::prng::SplitMix64;
    use crate::spectrum::fft2;
    use crate::stack::Image;

    #[test]
    fn expanded_fibers_are_the_spectra_and_about_half_is_kept() {
        // Every group kind: with and without the half turn, centred, hexagonal.
        for (symbol, n, cell) in [
            (GroupSymbol::P1, [24, 20], [4, 5]),
            (GroupSymbol::Pm, [24, 16], [4, 4]),
            (GroupSymbol::P4m, [32, 32], [4, 4]),
            (GroupSymbol::Cm, [32, 32], [4, 4]),
            (GroupSymbol::P3, [24, 24], [4, 4]),
            (GroupSymbol::P6m, [24, 24], [4, 4]),
        ] {
            let sym = Symmetry::new(n, cell, &PlaneGroup::standard(symbol)).unwrap();
            let orbits = sym.orbits();
            let pairs = orbit_pairs(&sym, &orbits);
            let mut rng = SplitMix64(5);
            let spectra: Vec<Vec<Complex64>> = (0..3)
                .map(|_| fft2(&Image::new(n[0], n[1], (0..n[0] * n[1]).map(|_| rng.between(-1.0, 1.0)).collect())))
                .collect();
            let mut store = PairFibers::new(&sym, &orbits, &pairs, spectra.len());
            // Out of order: each image has its own place.
            for i in (0..spectra.len()).rev() {
                store.set(i, &spectra[i]);
            }
            store.finish_filling();
            let l = sym.lattice();
            let mut kept = 0;
            for (p, pair) in pairs.iter().enumerate() {
                kept += store.pair(p).len();
                let buffers = expand(&sym, &orbits, pair, store.pair(p), 3).unwrap();
                for (s, buffer) in spectra.iter().zip(&buffers) {
                    for (j, &f) in pair_points(&orbits, pair).iter().enumerate() {
                        for (k, &eta) in l.dual().iter().enumerate() {
                            let z = s[l.linear(l.add(l.fiber_rep(f), eta))];
                            // Mirrored values agree to round-off (the FFT of real data is Hermitian to ~1e-15).
                            assert!((buffer[j * l.fiber_len() + k] - z).norm() < 1e-12, "{symbol:?} pair {pair:?}");
                        }
                    }
                }
            }
            // Only the few fibers that are their own mirror are kept whole.
            let whole = 3 * n[0] * n[1];
            assert!(kept * 10 <= whole * 6, "{symbol:?}: kept {kept} of {whole} values");
        }
    }

    #[test]
    fn a_wrong_number_of_kept_values_is_an_error() {
        let sym = Symmetry::new([8, 8], [4, 4], &PlaneGroup::standard(GroupSymbol::P2)).unwrap();
        let orbits = sym.orbits();
        let pair = &orbit_pairs(&sym, &orbits)[1];
        let len = kept_len(&sym, &orbits, pair);
        assert!(expand(&sym, &orbits, pair, &vec![Complex64::new(0.0, 0.0); len * 2 - 1], 2).is_err());
        assert_eq!(expand(&sym, &orbits, pair, &vec![Complex64::new(1.0, 0.0); len * 2], 2).unwrap().len(), 2);
    }
}
