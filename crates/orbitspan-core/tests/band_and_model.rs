//! Band limits (MATH.md §6), saved models, validation and cancellation.

use orbitspan_core::band::{self, frequency_orbits};
use orbitspan_core::fiber::Symmetry;
use orbitspan_core::plane_group::{GroupSymbol, PlaneGroup};
use orbitspan_core::spectrum::{fft2, ifft2_real};
use orbitspan_core::{fit, BandSpec, Error, FitSettings, Image, Model, Silent, Stack};

fn random_images(seed: u64, count: usize, n: [usize; 2]) -> Vec<Image> {
    let mut s = seed;
    (0..count)
        .map(|_| {
            Image::new(
                n[0],
                n[1],
                (0..n[0] * n[1])
                    .map(|_| {
                        s ^= s << 13;
                        s ^= s >> 7;
                        s ^= s << 17;
                        (s >> 11) as f64 / (1u64 << 53) as f64
                    })
                    .collect(),
            )
        })
        .collect()
}

fn stack_of(images: &[Image]) -> Stack {
    Stack::new(images.iter().enumerate().map(|(i, im)| (format!("img{i}.png"), im.clone())).collect()).unwrap()
}

fn settings(symbol: GroupSymbol, cell: usize, l: usize, band: Option<BandSpec>) -> FitSettings {
    FitSettings {
        group: PlaneGroup::standard(symbol),
        cell_rows: cell,
        cell_cols: cell,
        origin: [0, 0],
        generators: l,
        band,
        lattice_coords: symbol.is_hexagonal(),
    }
}

#[test]
fn band_identity_holds_term_by_term() {
    // E(F,S) = E(P_Ω F, S) + ||F − P_Ω F||², each side computed separately.
    let images = random_images(3, 4, [8, 8]);
    let stack = stack_of(&images);
    let s = settings(GroupSymbol::P4m, 4, 3, Some(BandSpec::Frequencies(24)));
    let banded = fit(&stack, &s, &mut Silent).unwrap();
    let sym = Symmetry::new([8, 8], [4, 4], &s.group).unwrap();
    let spectra: Vec<_> = images.iter().map(fft2).collect();
    let omega = band::select(&sym, &BandSpec::Frequencies(24), &band::power(&spectra), false).unwrap();
    assert_eq!(omega.len(), banded.report.band.as_ref().unwrap().frequencies);
    assert!(omega.len() <= 24);
    // P_Ω F in pixel space, and the energy outside the band in pixel space.
    let mut outside = 0.0;
    let mut limited = Vec::new();
    for spec in &spectra {
        let mut s2 = spec.clone();
        omega.restrict(&mut s2);
        let (img, _) = ifft2_real(&s2, 8, 8);
        limited.push(img.clone());
        let f = &images[limited.len() - 1];
        outside += f.pixels.iter().zip(&img.pixels).map(|(a, b)| (a - b) * (a - b)).sum::<f64>();
    }
    let report = banded.report.band.clone().unwrap();
    assert!((report.outside_energy - outside).abs() < 1e-9 * outside);
    let unbanded = fit(&stack_of(&limited), &settings(GroupSymbol::P4m, 4, 3, None), &mut Silent).unwrap();
    for (a, b) in banded.report.error_curve.iter().zip(&unbanded.report.error_curve) {
        assert!((a.error - (b.error + outside)).abs() < 1e-9 * a.error, "{} vs {} + {}", a.error, b.error, outside);
    }
    // The band-limited model applied to the original stack gives E(F, S) itself.
    // Image by image, the fit's own errors (from its per-frequency solutions)
    // equal the model's frame projection of the original images.
    let applied = banded.model.evaluate(&stack, &mut Silent).unwrap();
    let direct: f64 = applied.iter().map(|e| e.error).sum();
    assert!((direct - banded.report.error_curve[2].error).abs() < 1e-9 * direct);
    for (a, b) in applied.iter().zip(&banded.report.images) {
        assert!((a.error - b.error).abs() < 1e-9 * a.error, "{}: model {} vs fit {}", a.file, a.error, b.error);
    }
    // The generators lie in V_Ω.
    for g in banded.model.generators() {
        let spec = fft2(g);
        for (z, &keep) in spec.iter().zip(&omega.mask) {
            assert!(keep || z.norm() < 1e-9, "generator has energy outside the band");
        }
    }
}

#[test]
fn chosen_band_is_optimal_against_brute_force() {
    // 4x4 torus, p2 with a 2x2 cell: few frequency orbits, enumerate all invariant sets.
    let images = random_images(11, 3, [4, 4]);
    let spectra: Vec<_> = images.iter().map(fft2).collect();
    let sym = Symmetry::new([4, 4], [2, 2], &PlaneGroup::standard(GroupSymbol::P2)).unwrap();
    let orbits = frequency_orbits(&sym);
    let energy: Vec<f64> = orbits
        .iter()
        .map(|o| o.iter().map(|&k| spectra.iter().map(|s| s[k].norm_sqr()).sum::<f64>()).sum())
        .collect();
    assert!(orbits.len() <= 16);
    for m in 1..=16 {
        let omega = band::select(&sym, &BandSpec::Frequencies(m), &band::power(&spectra), false).unwrap();
        let kept: f64 = omega.mask.iter().enumerate().filter(|(_, &b)| b).map(|(k, _)| spectra.iter().map(|s| s[k].norm_sqr()).sum::<f64>()).sum();
        let mut best = 0.0f64;
        for subset in 0u32..(1 << orbits.len()) {
            let size: usize = (0..orbits.len()).filter(|&i| subset >> i & 1 == 1).map(|i| orbits[i].len()).sum();
            if size <= m {
                best = best.max((0..orbits.len()).filter(|&i| subset >> i & 1 == 1).map(|i| energy[i]).sum());
            }
        }
        assert!((kept - best).abs() < 1e-9 * best.max(1.0), "M={m}: kept {kept}, best {best}");
    }
}

#[test]
fn bands_are_invariant_and_radius_bands_are_discs() {
    let images = random_images(5, 2, [12, 12]);
    let spectra: Vec<_> = images.iter().map(fft2).collect();
    let sym = Symmetry::new([12, 12], [4, 4], &PlaneGroup::standard(GroupSymbol::P4g)).unwrap();
    let l = sym.lattice();
    for spec in [BandSpec::Frequencies(30), BandSpec::Radius(3.2)] {
        let omega = band::select(&sym, &spec, &band::power(&spectra), false).unwrap();
        for k in 0..144 {
            let xi = [k / 12, k % 12];
            for op in sym.ops() {
                assert_eq!(omega.mask[k], omega.mask[l.linear(l.dual_action(&op.g, xi))]);
            }
            assert_eq!(omega.mask[k], omega.mask[l.linear(l.neg(xi))]);
        }
    }
    let disc = band::select(&sym, &BandSpec::Radius(3.2), &band::power(&spectra), false).unwrap();
    for k in 0..144 {
        let wrap = |v: usize| if v > 6 { v as f64 - 12.0 } else { v as f64 };
        let (a, b) = (wrap(k / 12), wrap(k % 12));
        assert_eq!(disc.mask[k], a * a + b * b <= 3.2 * 3.2, "frequency {a},{b}");
    }
}

#[test]
fn model_round_trips_and_refuses_corruption() {
    let images = random_images(8, 3, [8, 8]);
    let stack = stack_of(&images);
    let fitted = fit(&stack, &settings(GroupSymbol::Pgg, 4, 2, None), &mut Silent).unwrap();
    let bytes = fitted.model.to_bytes();
    let loaded = Model::from_bytes("saved.orbitspan-model", &bytes).unwrap();
    for (a, b) in loaded.generators().iter().zip(fitted.model.generators()) {
        assert_eq!(a.pixels, b.pixels);
    }
    let errors = loaded.evaluate(&stack, &mut Silent).unwrap();
    for (a, b) in errors.iter().zip(&fitted.report.images) {
        assert_eq!(a.file, b.file);
        assert!((a.error - b.error).abs() < 1e-12 * b.energy);
    }
    // fitted + residual = data, and the projection is idempotent
    let p = loaded.project(&images[0]).unwrap();
    let pp = loaded.project(&p).unwrap();
    for (x, y) in p.pixels.iter().zip(&pp.pixels) {
        assert!((x - y).abs() < 1e-10);
    }
    let bad = |b: &[u8]| Model::from_bytes("m.orbitspan-model", b).unwrap_err().to_string();
    assert!(bad(&bytes[..bytes.len() - 8]).contains("truncated"), "{}", bad(&bytes[..bytes.len() - 8]));
    assert!(bad(&bytes[..10]).contains("m.orbitspan-model"));
    let mut flipped = bytes.clone();
    let last = flipped.len() - 3;
    flipped[last] ^= 0x40;
    assert!(bad(&flipped).contains("checksum"), "{}", bad(&flipped));
    let mut version = bytes.clone();
    version[8] = 9;
    assert!(bad(&version).contains("version 9"));
    assert!(bad(b"hello world, not a model").contains("not an orbitspan model"));
    // applying to images of another size names the file
    let other = Stack::new(vec![("small.png".into(), Image::zeros(4, 4))]).unwrap();
    let msg = loaded.evaluate(&other, &mut Silent).unwrap_err().to_string();
    assert!(msg.contains("small.png") && msg.contains("4x4") && msg.contains("8x8"), "{msg}");
}

#[test]
fn impossible_settings_are_refused_clearly() {
    let stack = stack_of(&random_images(1, 2, [8, 8]));
    let msg = |s: FitSettings| {
        let e = fit(&stack, &s, &mut Silent).unwrap_err();
        assert!(e.is_bad_input());
        e.to_string()
    };
    assert!(msg(settings(GroupSymbol::P4, 4, 0, None)).contains("at least 1"));
    assert!(msg(settings(GroupSymbol::P4, 4, 17, None)).contains("more than the 16 pixels in one cell"));
    assert!(msg(settings(GroupSymbol::P4, 3, 1, None)).contains("does not divide"));
    let mut hex = settings(GroupSymbol::P6, 4, 1, None);
    hex.lattice_coords = false;
    assert!(msg(hex).contains("lattice coordinates"));
    let mut origin = settings(GroupSymbol::P2, 4, 1, None);
    origin.origin = [8, 0];
    assert!(msg(origin).contains("outside"));
    assert!(msg(settings(GroupSymbol::P2, 4, 1, Some(BandSpec::Frequencies(0)))).contains("band"));
}

#[test]
fn cancelling_stops_the_fit() {
    let stack = stack_of(&random_images(2, 3, [16, 16]));
    let mut calls = 0;
    let mut cancel_after_three = |_: &str, _: f64| {
        calls += 1;
        calls < 3
    };
    let err = fit(&stack, &settings(GroupSymbol::P4m, 4, 2, None), &mut cancel_after_three).unwrap_err();
    assert!(matches!(err, Error::Cancelled));
}

#[test]
fn origin_moves_the_symmetry_centre() {
    // Shifting the stack by o and putting the origin at o is the same fit,
    // with generators shifted by o; the origin at (0,0) on the shifted stack
    // is a different fit (o = (3,5) is not in the normaliser of p4m on a 4x4 cell).
    let images = random_images(21, 3, [8, 8]);
    let shifted: Vec<Image> = images.iter().map(|im| im.shifted(3, 5)).collect();
    let mut s = settings(GroupSymbol::P4m, 4, 2, None);
    let plain = fit(&stack_of(&images), &s, &mut Silent).unwrap();
    s.origin = [3, 5];
    let moved = fit(&stack_of(&shifted), &s, &mut Silent).unwrap();
    for (a, b) in plain.report.error_curve.iter().zip(&moved.report.error_curve) {
        assert!((a.error - b.error).abs() < 1e-10 * a.error);
    }
    for (g, h) in plain.model.generators().iter().zip(moved.model.generators()) {
        let diff = g.shifted(3, 5).pixels.iter().zip(&h.pixels).map(|(x, y)| (x - y).abs()).fold(0.0, f64::max);
        assert!(diff < 1e-10, "generator differs by {diff}");
    }
    s.origin = [0, 0];
    let wrong = fit(&stack_of(&shifted), &s, &mut Silent).unwrap();
    let e = (wrong.report.error_curve[0].error - plain.report.error_curve[0].error).abs();
    assert!(e > 1e-6 * plain.report.error_curve[0].error);
}

#[test]
fn results_do_not_depend_on_the_thread_count() {
    // Per-orbit solves and generators run on threads; each orbit's work is
    // the same code whatever the count, so one thread and all threads give
    // bit-identical curves, per-image errors and generators.
    let images = random_images(11, 5, [16, 16]);
    let stack = stack_of(&images);
    for s in [settings(GroupSymbol::P4m, 4, 3, None), settings(GroupSymbol::P3m1, 4, 2, Some(BandSpec::Frequencies(60)))] {
        orbitspan_core::fiber::set_thread_limit(1);
        let one = fit(&stack, &s, &mut Silent).unwrap();
        orbitspan_core::fiber::set_thread_limit(0);
        let all = fit(&stack, &s, &mut Silent).unwrap();
        let curve = |f: &orbitspan_core::fit::Fit| f.report.error_curve.iter().map(|p| p.error.to_bits()).collect::<Vec<_>>();
        assert_eq!(curve(&one), curve(&all));
        for (a, b) in one.report.images.iter().zip(&all.report.images) {
            assert_eq!(a.error.to_bits(), b.error.to_bits());
        }
        for (a, b) in one.model.generators().iter().zip(all.model.generators()) {
            assert_eq!(a.pixels, b.pixels);
        }
    }
}
