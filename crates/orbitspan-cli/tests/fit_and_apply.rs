//! The command line end to end on the invented woven-cloth stack: `demo`
//! writes it, `fit --out` writes every result file with consistent numbers,
//! `apply` with the saved model reproduces the fit's per-image errors.

mod common;

use common::{close, fresh_dir, orbitspan};
use orbitspan_core::image_io::{read_path, DecodeLimits};
use orbitspan_core::npy::decode_f64;
use orbitspan_core::report::Report;
use serde_json::Value;
use std::path::{Path, PathBuf};

fn read_json(path: &Path) -> Value {
    let text = std::fs::read_to_string(path).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
    serde_json::from_str(&text).unwrap_or_else(|e| panic!("{}: {e}", path.display()))
}

fn read_npy(path: &Path) -> (Vec<usize>, Vec<f64>) {
    let bytes = std::fs::read(path).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
    decode_f64(&path.display().to_string(), &bytes).unwrap()
}

fn pngs_in(dir: &Path) -> Vec<PathBuf> {
    let mut files: Vec<PathBuf> = std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.extension().is_some_and(|x| x == "png"))
        .collect();
    files.sort();
    files
}

#[test]
fn demo_writes_every_stack_as_16_bit_png_with_settings() {
    let out = fresh_dir("demo");
    let run = orbitspan([OsArg::from("demo"), "--out".into(), out.as_os_str().into()]);
    assert_eq!(run.code, Some(0), "stderr: {}", run.stderr);

    let stacks = orbitspan_core::demo::all();
    // The README's example uses this folder.
    assert!(out.join("woven-cloth").join("settings.json").is_file(), "no woven-cloth folder");
    let folders: Vec<PathBuf> = std::fs::read_dir(&out).unwrap().map(|e| e.unwrap().path()).collect();
    assert_eq!(folders.len(), stacks.len());
    for stack in &stacks {
        let matching: Vec<&PathBuf> = folders
            .iter()
            .filter(|dir| read_json(&dir.join("settings.json"))["name"].as_str() == Some(stack.name))
            .collect();
        assert_eq!(matching.len(), 1, "folders for '{}': {matching:?}", stack.name);
        let dir = matching[0];
        let settings = read_json(&dir.join("settings.json"));
        let files: Vec<&str> = settings["images"].as_array().unwrap().iter().map(|v| v.as_str().unwrap()).collect();
        assert_eq!(files.len(), stack.images.len(), "{}", stack.name);
        assert_eq!(pngs_in(dir).len(), stack.images.len(), "{}", stack.name);
        assert_eq!(settings["suggested_settings"]["generators"].as_u64(), Some(stack.suggested.generators as u64));
        let readme = std::fs::read_to_string(dir.join("README.txt")).unwrap();
        assert_eq!(readme.lines().count(), 1, "{readme}");
        assert!(run.stdout.contains(&dir.display().to_string()), "{}", run.stdout);

        // 16-bit grey, and the pixel values survive to within the 16-bit step.
        let first = dir.join(files[0]);
        let decoded = image::open(&first).unwrap();
        assert_eq!(decoded.color(), image::ColorType::L16, "{}", first.display());
        let (_, original) = &stack.images[0];
        let (_, read) = &read_path(&first, &DecodeLimits::default()).unwrap()[0];
        assert_eq!((read.height, read.width), (original.height, original.width));
        for (a, b) in read.pixels.iter().zip(&original.pixels) {
            assert!((a - b.clamp(0.0, 1.0)).abs() <= 0.5 / 65535.0 + 1e-12, "{a} vs {b}");
        }
    }
}

type OsArg = std::ffi::OsString;

#[test]
fn fit_writes_consistent_results_and_apply_reproduces_them() {
    let root = fresh_dir("fit");
    let demo_dir = root.join("demo");
    let run = orbitspan([OsArg::from("demo"), "--out".into(), demo_dir.as_os_str().into()]);
    assert_eq!(run.code, Some(0), "stderr: {}", run.stderr);
    let cloth = demo_dir.join("woven-cloth");
    let settings = read_json(&cloth.join("settings.json"));
    let images = pngs_in(&cloth);
    let n = images.len();

    // fit with the suggested arguments
    let out = root.join("fit-out");
    let elsewhere = root.join("elsewhere.json");
    let mut args: Vec<OsArg> = vec!["fit".into()];
    args.extend(settings["suggested_arguments"].as_array().unwrap().iter().map(|v| OsArg::from(v.as_str().unwrap())));
    args.extend(["--out".into(), out.clone().into_os_string(), "--report".into(), elsewhere.clone().into_os_string()]);
    args.extend(images.iter().map(|p| p.clone().into_os_string()));
    let run = orbitspan(&args);
    assert_eq!(run.code, Some(0), "stderr: {}", run.stderr);

    let report: Report = serde_json::from_value(read_json(&out.join("report.json"))).unwrap();
    let (h, w) = (report.height, report.width);
    let l = report.settings.generators;
    assert_eq!(report.images.len(), n);
    assert_eq!(read_json(&elsewhere), read_json(&out.join("report.json")));

    // error curve: 1..=L, non-increasing, last point = sum of per-image errors
    let curve = &report.error_curve;
    assert_eq!(curve.iter().map(|p| p.generators).collect::<Vec<_>>(), (1..=l).collect::<Vec<_>>());
    for pair in curve.windows(2) {
        assert!(pair[1].error <= pair[0].error, "error rose: {:?}", pair);
    }
    let per_image: f64 = report.images.iter().map(|e| e.error).sum();
    let last = curve.last().unwrap().error;
    assert!(close(last, per_image, 1e-9), "E(L) {last} vs per-image sum {per_image}");
    let energy: f64 = report.images.iter().map(|e| e.energy).sum();
    assert!(close(report.total_energy, energy, 1e-9));
    assert!(last < report.total_energy, "the model explains nothing: {last} vs {}", report.total_energy);

    // stdout: a curve row per count, with PSNR = 10 log10(N H W / E)
    let row = run
        .stdout
        .lines()
        .find(|line| line.split_whitespace().next() == Some(&l.to_string()) && line.contains('%'))
        .unwrap_or_else(|| panic!("no curve row for L = {l} in:\n{}", run.stdout));
    let psnr: f64 = row.split_whitespace().nth(4).unwrap().parse().unwrap();
    let want = 10.0 * ((n * h * w) as f64 / last).log10();
    assert!((psnr - want).abs() <= 0.006, "printed PSNR {psnr}, want {want:.4} (row: {row})");
    for image in &images {
        let name = image.display().to_string();
        assert!(run.stdout.contains(&name), "per-image table lacks {name}");
    }

    // arrays: shapes, fitted + residual = data, residual energies = errors
    let (shape, _) = read_npy(&out.join("generators.npy"));
    assert_eq!(shape, vec![l, h, w]);
    let (shape, fitted) = read_npy(&out.join("approximations.npy"));
    assert_eq!(shape, vec![n, h, w]);
    let (shape, residuals) = read_npy(&out.join("residuals.npy"));
    assert_eq!(shape, vec![n, h, w]);
    for (i, path) in images.iter().enumerate() {
        let (_, data) = &read_path(path, &DecodeLimits::default()).unwrap()[0];
        let range = i * h * w..(i + 1) * h * w;
        for ((f, r), d) in fitted[range.clone()].iter().zip(&residuals[range.clone()]).zip(&data.pixels) {
            assert!((f + r - d).abs() <= 1e-12, "image {i}: fitted {f} + residual {r} != {d}");
        }
        let residual_energy: f64 = residuals[range].iter().map(|v| v * v).sum();
        assert!(close(residual_energy, report.images[i].error, 1e-9), "image {i}");
    }

    // pictures and model
    for k in 1..=l {
        assert!(out.join(format!("generator-{k:02}.png")).is_file(), "generator-{k:02}.png");
    }
    for i in 1..=n {
        for kind in ["fitted", "residual"] {
            let path = out.join(format!("{kind}-{i:03}.png"));
            let picture = image::open(&path).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
            assert_eq!((picture.height() as usize, picture.width() as usize), (h, w));
        }
    }
    let model = out.join("model.orbitspan-model");
    assert!(model.is_file());

    // apply the saved model to the same images: same per-image errors
    let applied = root.join("apply-out");
    let mut args: Vec<OsArg> =
        vec!["apply".into(), "--model".into(), model.into_os_string(), "--out".into(), applied.clone().into_os_string()];
    args.extend(images.iter().map(|p| p.clone().into_os_string()));
    let run = orbitspan(&args);
    assert_eq!(run.code, Some(0), "stderr: {}", run.stderr);
    let apply_report = read_json(&applied.join("report.json"));
    let apply_images = apply_report["images"].as_array().unwrap();
    assert_eq!(apply_images.len(), n);
    for (a, f) in apply_images.iter().zip(&report.images) {
        assert_eq!(a["file"].as_str().unwrap(), f.file);
        let error = a["error"].as_f64().unwrap();
        assert!(close(error, f.error, 1e-9), "{}: apply {error} vs fit {}", f.file, f.error);
    }
    assert!(close(apply_report["total_error"].as_f64().unwrap(), last, 1e-9));
    let (shape, apply_residuals) = read_npy(&applied.join("residuals.npy"));
    assert_eq!(shape, vec![n, h, w]);
    let scale = residuals.iter().fold(0.0f64, |m, v| m.max(v.abs()));
    for (a, b) in apply_residuals.iter().zip(&residuals) {
        assert!((a - b).abs() <= 1e-9 * scale.max(1.0), "residual {a} vs {b}");
    }
}

#[test]
fn help_and_version_exit_zero() {
    let run = orbitspan(["fit", "--help"]);
    assert_eq!(run.code, Some(0));
    assert!(run.stdout.contains("--band-frequencies") && run.stdout.contains("10 log10"), "{}", run.stdout);
    let run = orbitspan(["--version"]);
    assert_eq!(run.code, Some(0));
    assert_eq!(run.stdout.trim(), format!("orbitspan {}", env!("CARGO_PKG_VERSION")));
}
