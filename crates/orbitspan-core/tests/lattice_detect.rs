//! Lattice detection on synthetic stacks with known lattices, pure noise, and
//! the lattice-type definitions.
//!
//! Synthetic images are sums of Gaussian bumps at the lattice points (plus an
//! off-centre second bump for the oblique lattice), evaluated analytically at
//! the pixel centres `(row, column)`, with Gaussian noise of standard deviation
//! 0.1 against bump height 1 from the core's fixed-seed SplitMix64. Each image of a stack
//! has its own lattice origin and noise.

use orbitspan_core::lattice_detect::{
    classify, detect, reduce, DetectOptions, Detection, LatticeKind, LatticeVectors,
};
use orbitspan_core::prng::SplitMix64;
use orbitspan_core::{Image, Stack};

fn rotate(v: [f64; 2], degrees: f64) -> [f64; 2] {
    // (row, column) with the angle measured from the column axis towards the rows.
    let (s, c) = degrees.to_radians().sin_cos();
    [c * v[0] + s * v[1], -s * v[0] + c * v[1]]
}

/// A vector of length `length` at `degrees` from the column axis.
fn polar(length: f64, degrees: f64) -> [f64; 2] {
    let t = degrees.to_radians();
    [length * t.sin(), length * t.cos()]
}

/// A bump of the motif: offset in lattice coordinates, height, width (px).
struct Bump {
    at: [f64; 2],
    height: f64,
    sigma: f64,
}

/// Sum of Gaussian bumps at `origin + i a1 + j a2 + motif offset` on an
/// `n1 x n2` pixel grid, plus noise.
fn pattern(n: [usize; 2], lattice: &LatticeVectors, motif: &[Bump], origin: [f64; 2], noise: f64, rng: &mut SplitMix64) -> Image {
    let (a1, a2) = (lattice.a1, lattice.a2);
    let det = a1[0] * a2[1] - a1[1] * a2[0];
    let mut pixels = vec![0.0; n[0] * n[1]];
    for bump in motif {
        let reach = 7.0 * bump.sigma;
        // Lattice coordinates of the (padded) image corners bound the points needed.
        let mut lo = [f64::MAX; 2];
        let mut hi = [f64::MIN; 2];
        for corner in [[-reach, -reach], [-reach, n[1] as f64 + reach], [n[0] as f64 + reach, -reach], [n[0] as f64 + reach, n[1] as f64 + reach]] {
            let d = [corner[0] - origin[0], corner[1] - origin[1]];
            let c = [(d[0] * a2[1] - d[1] * a2[0]) / det, (a1[0] * d[1] - a1[1] * d[0]) / det];
            for k in 0..2 {
                lo[k] = lo[k].min(c[k]);
                hi[k] = hi[k].max(c[k]);
            }
        }
        for i in (lo[0].floor() as i64 - 1)..=(hi[0].ceil() as i64 + 1) {
            for j in (lo[1].floor() as i64 - 1)..=(hi[1].ceil() as i64 + 1) {
                let (fi, fj) = (i as f64 + bump.at[0], j as f64 + bump.at[1]);
                let p = [origin[0] + fi * a1[0] + fj * a2[0], origin[1] + fi * a1[1] + fj * a2[1]];
                let r0 = ((p[0] - reach).ceil().max(0.0)) as usize;
                let r1 = ((p[0] + reach).floor().min(n[0] as f64 - 1.0)) as i64;
                let c0 = ((p[1] - reach).ceil().max(0.0)) as usize;
                let c1 = ((p[1] + reach).floor().min(n[1] as f64 - 1.0)) as i64;
                if r1 < r0 as i64 || c1 < c0 as i64 {
                    continue;
                }
                let inv = 1.0 / (2.0 * bump.sigma * bump.sigma);
                for r in r0..=r1 as usize {
                    for c in c0..=c1 as usize {
                        let d2 = (r as f64 - p[0]).powi(2) + (c as f64 - p[1]).powi(2);
                        pixels[r * n[1] + c] += bump.height * (-d2 * inv).exp();
                    }
                }
            }
        }
    }
    for v in pixels.iter_mut() {
        *v += noise * rng.normal();
    }
    Image::new(n[0], n[1], pixels)
}

fn stack_of(n: [usize; 2], lattice: &LatticeVectors, motif: &[Bump], images: usize, noise: f64, seed: u64) -> Stack {
    let mut rng = SplitMix64(seed);
    let items = (0..images)
        .map(|i| {
            let origin = [rng.uniform() * 20.0, rng.uniform() * 20.0];
            (format!("synthetic #{i}"), pattern(n, lattice, motif, origin, noise, &mut rng))
        })
        .collect();
    Stack::new(items).unwrap()
}

fn angle_between(a: [f64; 2], b: [f64; 2]) -> f64 {
    (a[0] * b[1] - a[1] * b[0]).abs().atan2(a[0] * b[0] + a[1] * b[1]).to_degrees()
}

/// Errors of `found` against `truth` after expressing the truth in the basis
/// `found` uses (a unimodular change of basis, signs included): the largest
/// component error (px) and the largest angle error (degrees: the angle between
/// the vectors and the direction of each vector).
fn errors(found: &LatticeVectors, truth: &LatticeVectors) -> (f64, f64) {
    let (t1, t2) = (truth.a1, truth.a2);
    let det = t1[0] * t2[1] - t1[1] * t2[0];
    let coords = |v: [f64; 2]| -> [f64; 2] {
        [((v[0] * t2[1] - v[1] * t2[0]) / det).round(), ((t1[0] * v[1] - t1[1] * v[0]) / det).round()]
    };
    let (u1, u2) = (coords(found.a1), coords(found.a2));
    assert_eq!((u1[0] * u2[1] - u1[1] * u2[0]).abs(), 1.0, "found {found:?} is not a basis of the truth {truth:?}");
    let matched = |u: [f64; 2]| [u[0] * t1[0] + u[1] * t2[0], u[0] * t1[1] + u[1] * t2[1]];
    let (m1, m2) = (matched(u1), matched(u2));
    let component = [found.a1[0] - m1[0], found.a1[1] - m1[1], found.a2[0] - m2[0], found.a2[1] - m2[1]]
        .iter()
        .fold(0.0f64, |m, e| m.max(e.abs()));
    let angle = (angle_between(found.a1, found.a2) - angle_between(m1, m2))
        .abs()
        .max(angle_between(found.a1, m1))
        .max(angle_between(found.a2, m2));
    (component, angle)
}

const SIZE: [usize; 2] = [256, 256];
const ANGLES: [f64; 3] = [0.0, 13.0, 37.0];
const SPACINGS: [f64; 2] = [9.3, 12.7];
const NOISE: f64 = 0.1;
const COMPONENT_TOLERANCE_PX: f64 = 0.02;
const ANGLE_TOLERANCE_DEG: f64 = 0.05;

fn single_bump(spacing: f64) -> Vec<Bump> {
    vec![Bump { at: [0.0, 0.0], height: 1.0, sigma: 0.17 * spacing }]
}

/// Detects the lattice of a synthetic stack and checks it against the truth;
/// prints one row of the accuracy table.
fn check(kind: LatticeKind, truth: LatticeVectors, motif: &[Bump], n: [usize; 2], label: &str, seed: u64) -> Detection {
    let stack = stack_of(n, &truth, motif, 4, NOISE, seed);
    let found = detect(&stack, &DetectOptions::default()).unwrap_or_else(|e| panic!("{label}: {e}"));
    let (component, angle) = errors(&found.vectors, &truth);
    println!(
        "{:<20} {label:<28} max component error {component:.5} px, angle error {angle:.5} deg, sigma |a| {:.5} {:.5} px, sigma angle {:.5} deg, {} peaks",
        kind.name(),
        found.uncertainty[0],
        found.uncertainty[1],
        found.angle_uncertainty_deg,
        found.peaks_used
    );
    assert_eq!(found.kind, kind, "{label}: type");
    assert!(component <= COMPONENT_TOLERANCE_PX, "{label}: component error {component} px");
    assert!(angle <= ANGLE_TOLERANCE_DEG, "{label}: angle error {angle} deg");
    // The reduced basis: |a1| <= |a2|, angle in [60, 90] degrees.
    let [l1, l2] = found.vectors.lengths();
    let gamma = found.vectors.angle_deg();
    assert!(l1 <= l2 && (60.0 - 1e-9..=90.0 + 1e-9).contains(&gamma), "{label}: not reduced: {:?}", found.vectors);
    // The stated uncertainty is finite and of the size of the observed errors' scale.
    for s in found.uncertainty {
        assert!(s.is_finite() && s > 0.0 && s < COMPONENT_TOLERANCE_PX, "{label}: uncertainty {s}");
    }
    found
}

fn sweep(kind: LatticeKind, make: impl Fn(f64, f64) -> LatticeVectors, motif: impl Fn(f64) -> Vec<Bump>) {
    for (i, &spacing) in SPACINGS.iter().enumerate() {
        for (j, &angle) in ANGLES.iter().enumerate() {
            let label = format!("angle {angle} deg, spacing {spacing} px");
            check(kind, make(spacing, angle), &motif(spacing), SIZE, &label, 1000 + 10 * i as u64 + j as u64);
        }
    }
}

#[test]
fn square_lattices_are_found_to_a_fiftieth_of_a_pixel() {
    sweep(
        LatticeKind::Square,
        |s, t| LatticeVectors { a1: polar(s, t), a2: polar(s, t + 90.0) },
        single_bump,
    );
}

#[test]
fn hexagonal_lattices_are_found_to_a_fiftieth_of_a_pixel() {
    sweep(
        LatticeKind::Hexagonal,
        |s, t| LatticeVectors { a1: polar(s, t), a2: polar(s, t + 60.0) },
        single_bump,
    );
}

#[test]
fn rectangular_lattices_are_found_to_a_fiftieth_of_a_pixel() {
    sweep(
        LatticeKind::Rectangular,
        |s, t| LatticeVectors { a1: polar(s, t), a2: polar(1.37 * s, t + 90.0) },
        single_bump,
    );
}

#[test]
fn centred_rectangular_lattices_are_found_with_a_conventional_cell() {
    // Two shapes: B = 1.6 A (the reduced cell is a rhombus) and B = 2.3 A
    // (the reduced cell is A and the centring vector).
    for ratio in [1.6, 2.3] {
        for (i, &spacing) in SPACINGS.iter().enumerate() {
            for (j, &angle) in ANGLES.iter().enumerate() {
                let big_a = polar(spacing, angle);
                let big_b = polar(ratio * spacing, angle + 90.0);
                let centring = [(big_a[0] + big_b[0]) / 2.0, (big_a[1] + big_b[1]) / 2.0];
                let truth = LatticeVectors { a1: big_a, a2: centring };
                let label = format!("B/A {ratio}, angle {angle} deg, spacing {spacing} px");
                let seed = 2000 + 100 * (ratio * 10.0) as u64 + 10 * i as u64 + j as u64;
                let found = check(LatticeKind::CentredRectangular, truth, &single_bump(spacing), SIZE, &label, seed);
                // The conventional cell is the rectangle A x B (up to order and sign).
                let conv = found.conventional;
                assert!((conv.angle_deg() - 90.0).abs() < ANGLE_TOLERANCE_DEG, "{label}: conventional {conv:?}");
                let mut lengths = conv.lengths();
                lengths.sort_by(f64::total_cmp);
                assert!((lengths[0] - spacing).abs() < 0.03, "{label}: conventional A {}", lengths[0]);
                assert!((lengths[1] - ratio * spacing).abs() < 0.03, "{label}: conventional B {}", lengths[1]);
                assert!((conv.area() - 2.0 * found.vectors.area()).abs() < 1e-9 * conv.area(), "{label}: area");
            }
        }
    }
}

#[test]
fn oblique_lattices_with_a_two_bump_motif_are_found_to_a_fiftieth_of_a_pixel() {
    sweep(
        LatticeKind::Oblique,
        |s, t| LatticeVectors { a1: polar(s, t), a2: polar(1.23 * s, t + 74.0) },
        |s| {
            vec![
                Bump { at: [0.0, 0.0], height: 1.0, sigma: 0.17 * s },
                Bump { at: [0.31, 0.18], height: 0.6, sigma: 0.12 * s },
            ]
        },
    );
}

#[test]
fn extinctions_do_not_halve_the_lattice() {
    // Plane group pgg on a rectangular cell: bumps at (x, y), (-x, -y),
    // (1/2 - x, 1/2 + y), (1/2 + x, 1/2 - y) in lattice coordinates. The glides
    // extinguish (h, 0) and (0, k) for odd h, k, so the strongest peaks span a
    // sublattice of index 2 and the peaks with h + k odd must restore the cell.
    let (x, y) = (0.2, 0.15);
    let motif: Vec<Bump> = [[x, y], [-x, -y], [0.5 - x, 0.5 + y], [0.5 + x, 0.5 - y]]
        .iter()
        .map(|&at| Bump { at, height: 1.0, sigma: 1.6 })
        .collect();
    for (angle, seed) in [(0.0, 11), (13.0, 12), (37.0, 13)] {
        let truth = LatticeVectors { a1: polar(12.7, angle), a2: polar(1.37 * 12.7, angle + 90.0) };
        let label = format!("pgg, angle {angle} deg, 12.7 px");
        check(LatticeKind::Rectangular, truth, &motif, SIZE, &label, seed);
    }
}

#[test]
fn images_that_are_not_square_keep_rows_and_columns_apart() {
    // 192 rows x 256 columns: the bin sizes differ along the two axes.
    let truth = LatticeVectors { a1: polar(12.7, 37.0), a2: polar(12.7, 97.0) };
    check(LatticeKind::Hexagonal, truth, &single_bump(12.7), [192, 256], "192x256, angle 37 deg, 12.7 px", 7);
    let truth = LatticeVectors { a1: polar(9.3, 13.0), a2: polar(1.37 * 9.3, 103.0) };
    check(LatticeKind::Rectangular, truth, &single_bump(9.3), [256, 192], "256x192, angle 13 deg, 9.3 px", 8);
}

#[test]
fn two_cosines_give_the_lattice_without_an_uncertainty() {
    // cos(2π b1·x) + cos(2π b2·x): exactly two peaks in the half plane, so the
    // fit has no residual degrees of freedom and the uncertainty is NaN.
    let truth = LatticeVectors { a1: polar(12.7, 13.0), a2: polar(12.7, 103.0) };
    let det = truth.a1[0] * truth.a2[1] - truth.a1[1] * truth.a2[0];
    let b1 = [truth.a2[1] / det, -truth.a2[0] / det];
    let b2 = [-truth.a1[1] / det, truth.a1[0] / det];
    let mut rng = SplitMix64(21);
    let items = (0..4)
        .map(|i| {
            let pixels = (0..SIZE[0] * SIZE[1])
                .map(|p| {
                    let x = [(p / SIZE[1]) as f64 + i as f64, (p % SIZE[1]) as f64];
                    let wave = |b: [f64; 2]| (2.0 * std::f64::consts::PI * (b[0] * x[0] + b[1] * x[1])).cos();
                    wave(b1) + wave(b2) + NOISE * rng.normal()
                })
                .collect();
            (format!("waves #{i}"), Image::new(SIZE[0], SIZE[1], pixels))
        })
        .collect();
    let found = detect(&Stack::new(items).unwrap(), &DetectOptions::default()).unwrap();
    let (component, angle) = errors(&found.vectors, &truth);
    assert_eq!(found.peaks_used, 2);
    assert_eq!(found.kind, LatticeKind::Square);
    assert!(component <= COMPONENT_TOLERANCE_PX && angle <= ANGLE_TOLERANCE_DEG, "{component} px, {angle} deg");
    assert!(found.uncertainty.iter().all(|s| s.is_nan()) && found.angle_uncertainty_deg.is_nan());
}

#[test]
fn detection_is_deterministic() {
    let truth = LatticeVectors { a1: polar(9.3, 13.0), a2: polar(9.3, 73.0) };
    let stack = stack_of(SIZE, &truth, &single_bump(9.3), 4, NOISE, 99);
    let first = detect(&stack, &DetectOptions::default()).unwrap();
    let second = detect(&stack, &DetectOptions::default()).unwrap();
    assert_eq!(first, second);
    assert_eq!(first.kind, LatticeKind::Hexagonal);
    assert_eq!(serde_json::to_value(first.kind).unwrap(), "hexagonal");
    assert_eq!(serde_json::to_value(LatticeKind::CentredRectangular).unwrap(), "centred_rectangular");
}

#[test]
fn pure_noise_has_no_lattice() {
    for (images, seed) in [(1, 5u64), (4, 6), (8, 7)] {
        let mut rng = SplitMix64(seed);
        let items = (0..images)
            .map(|i| {
                let pixels = (0..SIZE[0] * SIZE[1]).map(|_| rng.normal()).collect();
                (format!("noise #{i}"), Image::new(SIZE[0], SIZE[1], pixels))
            })
            .collect();
        let stack = Stack::new(items).unwrap();
        let error = detect(&stack, &DetectOptions::default()).expect_err("noise has no lattice");
        assert!(error.is_bad_input());
        assert!(error.to_string().starts_with("no lattice found"), "{error}");
    }
    // A constant image: nothing at all in the spectrum.
    let stack = Stack::new(vec![("flat".into(), Image::new(64, 64, vec![0.5; 64 * 64]))]).unwrap();
    let error = detect(&stack, &DetectOptions::default()).expect_err("flat");
    assert!(error.to_string().starts_with("no lattice found"), "{error}");
}

#[test]
fn stripes_have_no_two_dimensional_lattice() {
    // Bumps repeated along one direction only: a one-dimensional lattice.
    let mut rng = SplitMix64(3);
    let pixels = (0..SIZE[0] * SIZE[1])
        .map(|i| {
            let (r, c) = ((i / SIZE[1]) as f64, (i % SIZE[1]) as f64);
            let t = (r * 0.3 + c * 0.95) / 10.3;
            (-((t - t.round()) * 10.3).powi(2) / 4.0).exp() + NOISE * rng.normal()
        })
        .collect();
    let stack = Stack::new(vec![("stripes".into(), Image::new(SIZE[0], SIZE[1], pixels))]).unwrap();
    let error = detect(&stack, &DetectOptions::default()).expect_err("stripes");
    assert!(error.to_string().contains("one line"), "{error}");
}

#[test]
fn reduction_gives_the_shortest_basis_at_60_to_90_degrees() {
    // A skewed basis of the square lattice of side 10: (10, 0) and (30, 10).
    let r = reduce(&LatticeVectors { a1: [10.0, 0.0], a2: [30.0, 10.0] });
    assert!((r.lengths()[0] - 10.0).abs() < 1e-12 && (r.lengths()[1] - 10.0).abs() < 1e-12, "{r:?}");
    assert!((r.angle_deg() - 90.0).abs() < 1e-9);
    // A hexagonal lattice given at 120 degrees and with a long second vector.
    let a1 = polar(7.0, 21.0);
    let a2 = polar(7.0, 141.0);
    let long = [a2[0] + 3.0 * a1[0], a2[1] + 3.0 * a1[1]];
    let r = reduce(&LatticeVectors { a1: long, a2: a1 });
    assert!((r.angle_deg() - 60.0).abs() < 1e-9, "{r:?}");
    assert!((r.lengths()[0] - 7.0).abs() < 1e-12 && (r.lengths()[1] - 7.0).abs() < 1e-12);
    assert!((r.area() - 7.0 * 7.0 * 60f64.to_radians().sin()).abs() < 1e-9);
    // The sign convention: a1 points to increasing columns, a1·a2 >= 0.
    let r = reduce(&LatticeVectors { a1: [-3.0, -5.0], a2: [4.0, -1.0] });
    assert!(r.a1[1] > 0.0 && r.a1[0] * r.a2[0] + r.a1[1] * r.a2[1] >= 0.0, "{r:?}");
    assert!((r.area() - 23.0).abs() < 1e-12);
}

/// Outside facts: the five two-dimensional lattice types and their metric
/// conditions, International Tables for Crystallography Vol. A (two-dimensional
/// lattices / crystal families; common practice): hexagonal `a = b`, `γ = 120°`
/// (equivalently 60° between `a` and `a + b`); square `a = b`, `γ = 90°`;
/// rectangular `a ≠ b`, `γ = 90°`; centred rectangular a rectangle with a
/// centring point (primitive cell a rhombus, `a = b`, any angle); oblique no
/// condition.
#[test]
fn lattice_types_follow_the_international_tables_definitions() {
    let options = DetectOptions::default();
    let kinds = |a1: [f64; 2], a2: [f64; 2]| -> Vec<LatticeKind> {
        [0.0, 13.0, 37.0, 90.0, 151.0]
            .iter()
            .map(|&t| classify(&LatticeVectors { a1: rotate(a1, t), a2: rotate(a2, t) }, &options))
            .collect()
    };
    let all = |kind: LatticeKind| vec![kind; 5];
    // Hexagonal: equal lengths at 60 and at 120 degrees.
    assert_eq!(kinds(polar(5.0, 0.0), polar(5.0, 60.0)), all(LatticeKind::Hexagonal));
    assert_eq!(kinds(polar(5.0, 0.0), polar(5.0, 120.0)), all(LatticeKind::Hexagonal));
    // Square: equal lengths at 90 degrees, also given by a non-reduced basis.
    assert_eq!(kinds([4.0, 0.0], [0.0, 4.0]), all(LatticeKind::Square));
    assert_eq!(kinds([4.0, 0.0], [8.0, 4.0]), all(LatticeKind::Square));
    // Rectangular: unequal lengths at 90 degrees.
    assert_eq!(kinds([4.0, 0.0], [0.0, 6.5]), all(LatticeKind::Rectangular));
    // Centred rectangular: rhombic primitive cell, and a rectangle 3 x 8 with centring.
    assert_eq!(kinds(polar(5.0, 0.0), polar(5.0, 75.0)), all(LatticeKind::CentredRectangular));
    assert_eq!(kinds([3.0, 0.0], [1.5, 4.0]), all(LatticeKind::CentredRectangular));
    // Oblique: no condition.
    assert_eq!(kinds(polar(5.0, 0.0), polar(6.1, 74.0)), all(LatticeKind::Oblique));
    // The tolerances are what decide: 1% longer or 0.5 degrees off is still
    // hexagonal, 6% or 1 degree is not (the rhombus stays centred rectangular).
    assert_eq!(kinds(polar(5.0, 0.0), polar(5.04, 60.4)), all(LatticeKind::Hexagonal));
    assert_eq!(kinds(polar(5.0, 0.0), polar(5.0, 61.0)), all(LatticeKind::CentredRectangular));
    assert_eq!(kinds(polar(5.0, 0.0), polar(5.3, 60.0)), all(LatticeKind::Oblique));
    assert_eq!(kinds([4.0, 0.0], [0.0, 4.1]), all(LatticeKind::Rectangular));
    let strict = DetectOptions { length_tolerance: 0.001, angle_tolerance_deg: 0.05 };
    assert_eq!(classify(&LatticeVectors { a1: polar(5.0, 0.0), a2: polar(5.0, 60.2) }, &strict), LatticeKind::CentredRectangular);
}
