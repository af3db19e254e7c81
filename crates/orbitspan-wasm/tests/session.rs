//! The facade through its JavaScript interface (run in Node by
//! wasm-bindgen-test-runner): the numbers must be the core's, errors must
//! name the file, and the session must keep its state across failures.
#![cfg(target_arch = "wasm32")]

use js_sys::{Array, Function, Reflect, Uint8Array};
use orbitspan_core::lattice_detect::{self, DetectOptions};
use orbitspan_core::picture as pictures_core;
use orbitspan_core::report::{ImageError, Report};
use orbitspan_core::{fit, npy, survey, BandSpec, FitSettings, Image, Silent, Stack};
use orbitspan_wasm::{LatticeChoice, LatticeFit, PageSettings, Session};
use wasm_bindgen::{JsCast, JsValue};
use wasm_bindgen_test::wasm_bindgen_test;

const SIDE: usize = 8;

/// Three 8 x 8 images of 16-bit levels from a fixed linear congruential
/// sequence (Numerical Recipes' constants), so the data has no symmetry.
fn tiny_levels() -> Vec<(String, Vec<u16>)> {
    let mut x: u32 = 12345;
    (1..=3)
        .map(|i| {
            let levels = (0..SIDE * SIDE)
                .map(|_| {
                    x = x.wrapping_mul(1_664_525).wrapping_add(1_013_904_223);
                    (x >> 16) as u16
                })
                .collect();
            (format!("tile-{i}.png"), levels)
        })
        .collect()
}

fn png16(height: usize, width: usize, levels: &[u16]) -> Vec<u8> {
    let buffer = image::ImageBuffer::<image::Luma<u16>, Vec<u16>>::from_raw(width as u32, height as u32, levels.to_vec()).unwrap();
    let mut out = std::io::Cursor::new(Vec::new());
    buffer.write_to(&mut out, image::ImageFormat::Png).unwrap();
    out.into_inner()
}

/// The same images as the core reads them: `value / 65535` (image_io docs).
fn tiny_stack() -> Stack {
    Stack::new(
        tiny_levels()
            .into_iter()
            .map(|(name, levels)| (name, Image::new(SIDE, SIDE, levels.iter().map(|&v| f64::from(v) / 65535.0).collect())))
            .collect(),
    )
    .unwrap()
}

fn session_with_tiny_stack() -> Session {
    let mut session = Session::new();
    for (name, levels) in tiny_levels() {
        session.add_file(&name, &png16(SIDE, SIDE, &levels), 0, 0).unwrap();
    }
    session
}

fn page_settings(group: &str, cell_rows: usize, cell_cols: usize, generators: usize) -> PageSettings {
    PageSettings {
        group: group.into(),
        cell_rows,
        cell_cols,
        origin: [0, 0],
        generators,
        band: None,
        lattice_coords: false,
        lattice: None,
        samples: None,
    }
}

fn js(settings: &PageSettings) -> JsValue {
    serde_wasm_bindgen::to_value(settings).unwrap()
}

fn keep_going() -> Function {
    Function::new_with_args("stage, fraction", "return true;")
}

fn get(value: &JsValue, key: &str) -> JsValue {
    Reflect::get(value, &JsValue::from_str(key)).unwrap()
}

fn error_name_and_message(error: &JsValue) -> (String, String) {
    (get(error, "name").as_string().unwrap(), get(error, "message").as_string().unwrap())
}

fn assert_close(a: f64, b: f64, tolerance: f64, what: &str) {
    let scale = a.abs().max(b.abs()).max(1e-300);
    assert!((a - b).abs() <= tolerance * scale, "{what}: {a} vs {b}");
}

#[wasm_bindgen_test]
fn a_fit_through_the_facade_gives_the_cores_numbers() {
    let mut session = session_with_tiny_stack();
    let settings = page_settings("p4m", 4, 4, 3);
    let report: Report = serde_wasm_bindgen::from_value(session.fit(js(&settings), &keep_going()).unwrap()).unwrap();
    let core: FitSettings = settings.to_core().unwrap();
    let expected = fit(&tiny_stack(), &core, &mut Silent).unwrap().report;

    assert_eq!(report.error_curve.len(), 3);
    assert_close(report.total_energy, expected.total_energy, 1e-12, "total energy");
    for (a, b) in report.error_curve.iter().zip(&expected.error_curve) {
        assert_eq!(a.generators, b.generators);
        assert_close(a.error, b.error, 1e-12, "curve error");
        assert_close(a.relative_error, b.relative_error, 1e-12, "curve relative error");
    }
    // Random data is far from p4m-invariant: more generators must help.
    assert!(report.error_curve[0].error > report.error_curve[2].error * 1.01);
    let files: Vec<&str> = report.images.iter().map(|e| e.file.as_str()).collect();
    assert_eq!(files, ["tile-1.png", "tile-2.png", "tile-3.png"]);
    for (a, b) in report.images.iter().zip(&expected.images) {
        assert_close(a.error, b.error, 1e-12, &a.file);
    }
    // report.json is the text the command line writes for the same report.
    assert_eq!(session.report_json().unwrap(), serde_json::to_string_pretty(&expected).unwrap());
}

#[wasm_bindgen_test]
fn a_corrupt_file_names_the_file_and_the_stack_stays() {
    let mut session = session_with_tiny_stack();
    let mut broken = b"\x89PNG\r\n\x1a\n".to_vec();
    broken.extend_from_slice(b"this is not a png stream at all");
    let error = session.add_file("broken.png", &broken, 0, 0).unwrap_err();
    let (name, message) = error_name_and_message(&error);
    assert_eq!(name, "BadInput");
    assert!(message.contains("broken.png"), "{message}");
    assert_eq!(session.images().length(), 3);
    // The good images still fit.
    assert!(session.fit(js(&page_settings("p1", 8, 8, 2)), &keep_going()).is_ok());
}

#[wasm_bindgen_test]
fn an_image_of_another_size_refuses_its_whole_file() {
    let mut session = session_with_tiny_stack();
    let narrow = png16(8, 6, &[1000; 48]);
    let error = session.add_file("narrow.png", &narrow, 0, 0).unwrap_err();
    let (name, message) = error_name_and_message(&error);
    assert_eq!(name, "BadInput");
    assert!(message.contains("narrow.png") && message.contains("8x6"), "{message}");
    assert_eq!(session.images().length(), 3);
}

#[wasm_bindgen_test]
fn tiles_are_cut_and_labelled() {
    let mut session = Session::new();
    let (_, levels) = tiny_levels().remove(0);
    let added = session.add_file("big.png", &png16(SIDE, SIDE, &levels), 4, 4).unwrap();
    assert_eq!(added.length(), 4);
    let labels: Vec<String> = added.iter().map(|o| get(&o, "label").as_string().unwrap()).collect();
    assert_eq!(labels, ["big.png@0,0", "big.png@0,4", "big.png@4,0", "big.png@4,4"]);
    let pictures = session.pictures(3).unwrap();
    let values: Vec<f64> = get(&get(&pictures, "original"), "values").dyn_into::<js_sys::Float64Array>().unwrap().to_vec();
    // Tile (4, 4): its first value is pixel (4, 4) of the file.
    assert_eq!(values[0], f64::from(levels[4 * SIDE + 4]) / 65535.0);
}

#[wasm_bindgen_test]
fn cancelling_keeps_the_stack_and_the_next_fit_runs() {
    let mut session = session_with_tiny_stack();
    let stop = Function::new_with_args("stage, fraction", "return false;");
    let error = session.fit(js(&page_settings("p4m", 4, 4, 2)), &stop).unwrap_err();
    assert_eq!(error_name_and_message(&error).0, "Cancelled");
    assert_eq!(session.images().length(), 3);
    let report: Report =
        serde_wasm_bindgen::from_value(session.fit(js(&page_settings("p4m", 4, 4, 2)), &keep_going()).unwrap()).unwrap();
    assert_eq!(report.error_curve.len(), 2);
}

#[wasm_bindgen_test]
fn settings_check_disables_groups_with_a_reason() {
    let mut session = session_with_tiny_stack();
    let check = session.check_settings(js(&page_settings("p1", 8, 4, 2))).unwrap();
    assert!(get(&check, "problem").is_null());
    let groups: Array = get(&check, "groups").dyn_into().unwrap();
    let find = |name: &str| groups.iter().find(|g| get(g, "name").as_string().as_deref() == Some(name)).unwrap();
    // A 8 x 4 cell is not square: the p4 family cannot be used; pmm can.
    for name in ["p4", "p4m", "p4g"] {
        let g = find(name);
        assert_eq!(get(&g, "ok").as_bool(), Some(false), "{name}");
        assert!(!get(&g, "reason").as_string().unwrap().is_empty());
    }
    assert_eq!(get(&find("pmm"), "ok").as_bool(), Some(true));
    assert_eq!(get(&find("pmm"), "full").as_string().unwrap(), "p2mm");
    // Hexagonal groups need lattice coordinates.
    let p6 = find("p6");
    assert_eq!(get(&p6, "ok").as_bool(), Some(false));
    assert!(get(&p6, "reason").as_string().unwrap().contains("lattice coordinates"));
    // pmg differs with its axes exchanged, pmm does not.
    assert!(groups.iter().any(|g| get(&g, "name").as_string().as_deref() == Some("pmg:ba")));
    assert!(!groups.iter().any(|g| get(&g, "name").as_string().as_deref() == Some("pmm:ba")));
    // A cell that does not divide the image is a problem for every group.
    let bad = session.check_settings(js(&page_settings("p1", 3, 3, 2))).unwrap();
    let problem = get(&bad, "problem").as_string().unwrap();
    assert!(problem.contains('3'), "{problem}");
}

#[wasm_bindgen_test]
fn a_saved_model_applied_in_a_new_session_gives_the_fits_errors() {
    let mut session = session_with_tiny_stack();
    let report: Report =
        serde_wasm_bindgen::from_value(session.fit(js(&page_settings("pmm", 4, 4, 3)), &keep_going()).unwrap()).unwrap();
    let bytes = session.model_bytes().unwrap().to_vec();

    let mut fresh = session_with_tiny_stack();
    let info = fresh.open_model("saved.orbitspan-model", &bytes).unwrap();
    assert_eq!(get(&info, "generators").as_f64(), Some(3.0));
    let errors: Vec<ImageError> = serde_wasm_bindgen::from_value(fresh.apply_model(&keep_going()).unwrap()).unwrap();
    assert_eq!(errors.len(), 3);
    for (a, b) in errors.iter().zip(&report.images) {
        assert_eq!(a.file, b.file);
        // Relative to the error, or to 1e-12 of the image's energy when the
        // image is fitted to round-off (both numbers are then round-off).
        let scale = a.error.abs().max(b.error.abs()).max(1e-12 * a.energy);
        assert!((a.error - b.error).abs() <= 1e-9 * scale, "{}: {} vs {}", a.file, a.error, b.error);
    }
    let broken = fresh.open_model("broken.orbitspan-model", b"not a model").unwrap_err();
    let (name, message) = error_name_and_message(&broken);
    assert_eq!(name, "BadInput");
    assert!(message.contains("broken.orbitspan-model"), "{message}");
}

/// What the page keeps of a fit for a worker restart (the model's record
/// and its generator pictures' values) makes the same model: its file is
/// byte for byte the fit's, and restoring drops a chosen count.
#[wasm_bindgen_test]
fn a_fits_record_and_generator_values_restore_its_model() {
    let mut session = session_with_tiny_stack();
    session.fit(js(&page_settings("p4", 4, 4, 3)), &keep_going()).unwrap();
    let bytes = session.model_bytes().unwrap().to_vec();
    let record = session.model_record().unwrap();
    let values: Array = session.generator_pictures().unwrap().iter().map(|p| get(&p, "values")).collect();
    assert_eq!(values.length(), 3);

    let mut fresh = session_with_tiny_stack();
    fresh.fit(js(&page_settings("p2", 4, 4, 2)), &keep_going()).unwrap();
    fresh.choose_generators(1).unwrap();
    let info = fresh.restore_model(&record, values.clone()).unwrap();
    assert_eq!(get(&info, "generators").as_f64(), Some(3.0));
    assert_eq!(fresh.model_bytes().unwrap().to_vec(), bytes);

    // Bad input is refused and says what is wrong; the model stays.
    let short: Array = values.iter().collect();
    short.set(1, js_sys::Float64Array::new_with_length(5).into());
    let (name, message) = error_name_and_message(&fresh.restore_model(&record, short).unwrap_err());
    assert_eq!(name, "BadInput");
    assert!(message.contains("generator 2 has 5 values"), "{message}");
    let (name, message) = error_name_and_message(&fresh.restore_model("{}", values.clone()).unwrap_err());
    assert_eq!(name, "BadInput");
    assert!(message.contains("record"), "{message}");
    let two: Array = values.iter().take(2).collect();
    let (_, message) = error_name_and_message(&fresh.restore_model(&record, two).unwrap_err());
    assert!(message.contains("2 generator images but its settings say 3"), "{message}");
    assert_eq!(fresh.model_bytes().unwrap().to_vec(), bytes);
}

#[wasm_bindgen_test]
fn fewer_chosen_generators_give_that_point_of_the_curve() {
    let mut session = session_with_tiny_stack();
    let report: Report =
        serde_wasm_bindgen::from_value(session.fit(js(&page_settings("p2", 4, 4, 3)), &keep_going()).unwrap()).unwrap();
    session.choose_generators(1).unwrap();
    let errors: Vec<ImageError> = serde_wasm_bindgen::from_value(session.apply_model(&keep_going()).unwrap()).unwrap();
    let total: f64 = errors.iter().map(|e| e.error).sum();
    assert_close(total, report.error_curve[0].error, 1e-9, "E(1)");
    assert!(session.choose_generators(4).is_err());
    // Saving now saves the chosen generator only.
    let saved = orbitspan_core::Model::from_bytes("current", &session.model_bytes().unwrap().to_vec()).unwrap();
    assert_eq!(saved.generators().len(), 1);
}

#[wasm_bindgen_test]
fn pictures_and_arrays_hold_original_fitted_and_residual() {
    let mut session = session_with_tiny_stack();
    session.fit(js(&page_settings("p4", 4, 4, 2)), &keep_going()).unwrap();
    let pictures = session.pictures(1).unwrap();
    assert!(get(&pictures, "problem").is_null());
    let values = |kind: &str| -> Vec<f64> {
        get(&get(&pictures, kind), "values").dyn_into::<js_sys::Float64Array>().unwrap().to_vec()
    };
    let (original, fitted, residual) = (values("original"), values("fitted"), values("residual"));
    let stack = tiny_stack();
    assert_eq!(original, stack.images()[1].pixels);
    for i in 0..original.len() {
        assert!((fitted[i] + residual[i] - original[i]).abs() < 1e-12);
    }
    assert!(residual.iter().any(|v| v.abs() > 1e-3), "random data leaves a residual");
    let rgba = get(&get(&pictures, "residual"), "rgba").dyn_into::<js_sys::Uint8ClampedArray>().unwrap();
    assert_eq!(rgba.length() as usize, 4 * SIDE * SIDE);

    let npy_bytes: Uint8Array = session.npy("residuals").unwrap();
    let (shape, data) = npy::decode_f64("residuals.npy", &npy_bytes.to_vec()).unwrap();
    assert_eq!(shape, [3, SIDE, SIDE]);
    assert_eq!(&data[SIDE * SIDE..2 * SIDE * SIDE], residual.as_slice());
    let png = session.png("residual", 1).unwrap().to_vec();
    assert!(png.starts_with(b"\x89PNG\r\n\x1a\n"));
}

#[wasm_bindgen_test]
fn the_example_stack_comes_with_its_settings() {
    let mut session = Session::new();
    let example = session.add_example(None).unwrap();
    let settings: PageSettings = serde_wasm_bindgen::from_value(get(&example, "settings")).unwrap();
    let demo = orbitspan_core::demo::woven_cloth();
    assert_eq!(settings, PageSettings::from_core(&demo.suggested));
    let images: Array = get(&example, "images").dyn_into().unwrap();
    assert_eq!(images.length() as usize, demo.images.len());
    assert_eq!(get(&images.get(0), "label").as_string().unwrap(), demo.images[0].0);
    assert_eq!(get(&images.get(0), "height").as_f64(), Some(demo.images[0].1.height as f64));
}

#[wasm_bindgen_test]
fn the_residual_legend_runs_from_blue_through_white_to_red() {
    let legend = orbitspan_wasm::residual_legend(101);
    assert_eq!(get(&legend, "width").as_f64(), Some(101.0));
    let rgba = get(&legend, "rgba").dyn_into::<js_sys::Uint8ClampedArray>().unwrap().to_vec();
    assert_eq!(rgba.len(), 4 * 101);
    let pixel = |i: usize| [rgba[4 * i], rgba[4 * i + 1], rgba[4 * i + 2]];
    // Zero is white and the ends are the core's blue (negative) and red (positive).
    assert_eq!(pixel(50), [255, 255, 255]);
    let (left, right) = (pixel(0), pixel(100));
    assert!(left[2] > left[0] + 50, "left end is blue: {left:?}");
    assert!(right[0] > right[2] + 50, "right end is red: {right:?}");
}

// ---- measured lattices ------------------------------------------------------

/// The honeycomb micrograph example in a session, and its suggested page settings.
fn micrograph_session() -> (Session, PageSettings) {
    let mut session = Session::new();
    let example = session.add_example(Some("honeycomb-micrograph".into())).unwrap();
    (session, serde_wasm_bindgen::from_value(get(&example, "settings")).unwrap())
}

fn numbers(value: &JsValue) -> Vec<f64> {
    Array::from(value).iter().map(|v| v.as_f64().unwrap()).collect()
}

#[wasm_bindgen_test]
fn the_micrograph_example_asks_to_measure_its_lattice() {
    let (_, settings) = micrograph_session();
    let demo = orbitspan_core::demo::honeycomb_micrograph();
    assert_eq!(settings.group, "p6m");
    assert_eq!(settings.lattice, Some(LatticeChoice::Detect));
    assert_eq!(settings.samples, Some(demo.suggested.cell_rows));
    assert_eq!(settings.generators, 1);
    assert_eq!(settings.band, Some(BandSpec::Frequencies(61)));
}

#[wasm_bindgen_test]
fn detection_on_the_micrograph_finds_its_lattice() {
    let (mut session, _) = micrograph_session();
    let found = session.detect_lattice().unwrap();
    assert_eq!(get(&found, "kind").as_string().unwrap(), "hexagonal");
    // The demo is generated with spacing 9.6 px and 60 degrees between the vectors (core demo::honeycomb_micrograph).
    for length in numbers(&get(&found, "lengths")) {
        assert!((length - 9.6).abs() < 0.01, "length {length} px");
    }
    let angle = get(&found, "angle").as_f64().unwrap();
    assert!((angle - 60.0).abs() < 0.05, "angle {angle} degrees");
    assert!(get(&found, "peaks").as_f64().unwrap() >= 2.0);
    // The same numbers as the core's detection.
    let core = lattice_detect::detect(&Stack::new(orbitspan_core::demo::honeycomb_micrograph().images).unwrap(), &DetectOptions::default()).unwrap();
    assert_eq!(numbers(&get(&found, "a1")), core.vectors.a1.to_vec());
    assert_eq!(numbers(&get(&found, "a2")), core.vectors.a2.to_vec());
}

#[wasm_bindgen_test]
fn a_measured_fit_through_the_facade_gives_the_cores_numbers() {
    let (mut session, settings) = micrograph_session();
    let report: Report = serde_wasm_bindgen::from_value(session.fit(js(&settings), &keep_going()).unwrap()).unwrap();

    // The command line's path: detect, reduced cell for p6m, fit_measured.
    let stack = Stack::new(orbitspan_core::demo::honeycomb_micrograph().images).unwrap();
    let detection = lattice_detect::detect(&stack, &DetectOptions::default()).unwrap();
    let cell = [detection.vectors.a1, detection.vectors.a2];
    let core = settings.to_core().unwrap();
    let expected = survey::fit_measured(&stack, cell, core.group, Some(10), 1, core.band, None, &mut Silent).unwrap();
    assert_eq!(report.error_curve.len(), 1);
    for (a, b) in report.error_curve.iter().zip(&expected.fit.report.error_curve) {
        assert_close(a.error, b.error, 1e-12, "curve error");
        assert_close(a.relative_error, b.relative_error, 1e-12, "curve relative error");
    }
    for (a, b) in report.images.iter().zip(&expected.fit.report.images) {
        assert_close(a.error, b.error, 1e-12, &a.file);
    }
    // The vacancy is in micrograph-3: the largest error per image (core demo docs).
    let worst = report.images.iter().max_by(|a, b| a.relative_error.total_cmp(&b.relative_error)).unwrap();
    assert_eq!(worst.file, "micrograph-3");

    // The model lives on the grid; the page is told which.
    let info = session.lattice_fit().unwrap();
    let grid = get(&info, "grid");
    assert_eq!(numbers(&get(&grid, "origin")), expected.grid.origin.to_vec());
    let model = session.model_info().unwrap();
    assert_eq!(get(&model, "height").as_f64(), Some(expected.grid.size()[0] as f64));

    // Applying the fit's model resamples through its grid: the fit's errors again.
    let applied: Vec<ImageError> = serde_wasm_bindgen::from_value(session.apply_model(&keep_going()).unwrap()).unwrap();
    for (a, b) in applied.iter().zip(&expected.fit.report.images) {
        assert_close(a.error, b.error, 1e-9, &a.file);
    }
}

#[wasm_bindgen_test]
fn measured_fit_pictures_are_in_pixel_geometry_with_the_residual_zero_outside_the_grid() {
    let (mut session, settings) = micrograph_session();
    session.fit(js(&settings), &keep_going()).unwrap();
    let pictures = session.pictures(2).unwrap();
    let residual = get(&pictures, "residual");
    assert_eq!(get(&residual, "height").as_f64(), Some(160.0));
    assert_eq!(get(&residual, "width").as_f64(), Some(160.0));
    let values: Vec<f64> = js_sys::Float64Array::from(get(&residual, "values")).to_vec();
    // The residual is known exactly where the core's grid maps back (core LatticeGrid::to_pixels mask).
    let info: LatticeFit = serde_wasm_bindgen::from_value(session.lattice_fit().unwrap()).unwrap();
    let [gh, gw] = info.grid.size();
    let (_, mask) = info.grid.to_pixels(&Image::new(gh, gw, vec![0.0; gh * gw]), 160, 160);
    assert!(values.iter().zip(&mask).all(|(v, &m)| v.is_nan() != m), "values are NaN exactly outside the grid");
    // The grid of whole cells at 17 degrees covers part of the square, not all of it.
    let inside: Vec<f64> = values.iter().copied().filter(|v| !v.is_nan()).collect();
    assert!(inside.len() > 1000 && inside.len() < values.len(), "{} of {} pixels inside", inside.len(), values.len());
    assert!(inside.iter().any(|v| v.abs() > 1e-3), "the residual inside the grid is not zero");
    // Drawn as white (the diverging scale's 0) outside.
    let rgba = js_sys::Uint8ClampedArray::from(get(&residual, "rgba")).to_vec();
    let first_outside = values.iter().position(|v| v.is_nan()).unwrap();
    assert_eq!(&rgba[4 * first_outside..4 * first_outside + 3], &pictures_core::diverging_rgba(&Image::new(1, 1, vec![0.0]))[..3]);
}

#[wasm_bindgen_test]
fn a_group_the_lattice_does_not_allow_is_refused_with_the_reason() {
    let (mut session, settings) = micrograph_session();
    let square = PageSettings { group: "p4m".into(), ..settings.clone() };
    let (name, message) = error_name_and_message(&session.fit(js(&square), &keep_going()).unwrap_err());
    assert_eq!(name, "BadInput");
    assert!(message.contains("p4m needs a square lattice; the lattice is hexagonal"), "{message}");
    let check = session.check_settings(js(&settings)).unwrap();
    let groups = Array::from(&get(&check, "groups"));
    let entry = |name: &str| groups.iter().find(|g| get(g, "name").as_string().as_deref() == Some(name)).unwrap();
    assert_eq!(get(&entry("p6m"), "ok").as_bool(), Some(true));
    assert_eq!(get(&entry("p4m"), "ok").as_bool(), Some(false));
    assert!(get(&entry("pmm"), "reason").as_string().unwrap().contains("rectangular"));
}

#[wasm_bindgen_test]
fn typed_vectors_are_reduced_and_classified() {
    let (mut session, _) = micrograph_session();
    // a1 + a2 and a2 of a hexagonal lattice of side 10 (120 degrees apart before reduction).
    let choice = serde_wasm_bindgen::to_value(&LatticeChoice::Vectors { a1: [0.0, 10.0], a2: [8.660254037844386, 5.0 - 10.0] }).unwrap();
    let lattice = session.lattice_of(choice).unwrap();
    assert_eq!(get(&lattice, "kind").as_string().unwrap(), "hexagonal");
    let angle = get(&lattice, "angle").as_f64().unwrap();
    assert!((angle - 60.0).abs() < 1e-9, "angle {angle}");
    assert!(get(&lattice, "peaks").is_null());
    let parallel = serde_wasm_bindgen::to_value(&LatticeChoice::Vectors { a1: [1.0, 2.0], a2: [2.0, 4.0] }).unwrap();
    let (name, message) = error_name_and_message(&session.lattice_of(parallel).unwrap_err());
    assert_eq!(name, "BadInput");
    assert!(message.contains("span no lattice"), "{message}");
}

#[wasm_bindgen_test]
fn the_survey_through_the_facade_equals_the_cores_ranking() {
    let (mut session, _) = micrograph_session();
    let options = serde_json::json!({ "lattice": { "mode": "detect" }, "samples": 10, "generators": 1 });
    let options = serde::Serialize::serialize(&options, &serde_wasm_bindgen::Serializer::json_compatible()).unwrap();
    let out = session.survey(options, &keep_going()).unwrap();
    let rows: Vec<survey::SurveyRow> = serde_wasm_bindgen::from_value(get(&out, "groups")).unwrap();
    let stack = Stack::new(orbitspan_core::demo::honeycomb_micrograph().images).unwrap();
    let d = lattice_detect::detect(&stack, &DetectOptions::default()).unwrap();
    let expected = survey::survey(
        &stack,
        orbitspan_core::plane_group::LatticeType::Hexagonal,
        [d.vectors.a1, d.vectors.a2],
        [d.conventional.a1, d.conventional.a2],
        Some(10),
        1,
        &mut Silent,
    )
    .unwrap();
    assert_eq!(rows, expected);
    assert_eq!(rows[0].group, "p6m");
}

/// Runs a fit as tasks: begin, every task through a separate solver (as a
/// helper worker would), answers accepted last to first, finish.
fn fit_by_tasks(session: &mut Session, settings: &PageSettings) -> JsValue {
    let count = session.fit_begin(js(settings), &keep_going()).unwrap();
    assert!(count > 1, "the fit is cut into several tasks");
    let mut solver = orbitspan_wasm::FitTaskSolver::new();
    let answers: Vec<Vec<u8>> =
        (0..count).map(|k| solver.solve(&session.fit_task(k).unwrap().to_vec()).unwrap().to_vec()).collect();
    for answer in answers.iter().rev() {
        session.fit_accept(answer).unwrap();
    }
    // Generator images: all but the first by tasks (the first made by
    // fitFinish), answers in reverse order.
    let generators = session.fit_generator_tasks().unwrap();
    assert_eq!(generators, settings.generators);
    let answers: Vec<Vec<u8>> =
        (1..generators).map(|l| solver.solve(&session.fit_generator_task(l).unwrap().to_vec()).unwrap().to_vec()).collect();
    for answer in answers.iter().rev() {
        session.fit_accept(answer).unwrap();
    }
    session.fit_finish(&keep_going()).unwrap()
}

/// The model's generator values as the page reads them.
fn generator_values(session: &Session) -> Vec<Vec<f64>> {
    session
        .generator_pictures()
        .unwrap()
        .iter()
        .map(|p| js_sys::Float64Array::from(get(&p, "values")).to_vec())
        .collect()
}

#[wasm_bindgen_test]
fn a_fit_spread_over_tasks_equals_the_fit_in_one_worker_bit_for_bit() {
    // Pixel grid.
    let settings = page_settings("p4m", 4, 4, 3);
    let mut one = session_with_tiny_stack();
    let direct = one.fit(js(&settings), &keep_going()).unwrap();
    let mut spread = session_with_tiny_stack();
    let by_tasks = fit_by_tasks(&mut spread, &settings);
    let (a, b): (Report, Report) =
        (serde_wasm_bindgen::from_value(direct).unwrap(), serde_wasm_bindgen::from_value(by_tasks).unwrap());
    assert_eq!(a, b);
    assert_eq!(generator_values(&one), generator_values(&spread));
    assert_eq!(one.model_bytes().unwrap().to_vec(), spread.model_bytes().unwrap().to_vec());

    // Measured lattice: resampled, fitted as tasks, mapped back.
    let (mut one, settings) = micrograph_session();
    let direct: Report = serde_wasm_bindgen::from_value(one.fit(js(&settings), &keep_going()).unwrap()).unwrap();
    let (mut spread, _) = micrograph_session();
    let by_tasks: Report = serde_wasm_bindgen::from_value(fit_by_tasks(&mut spread, &settings)).unwrap();
    assert_eq!(direct, by_tasks);
    assert_eq!(one.lattice_json().unwrap(), spread.lattice_json().unwrap());
    assert_eq!(generator_values(&one), generator_values(&spread));
}

#[wasm_bindgen_test]
fn a_fit_task_answer_without_a_begun_fit_or_damaged_is_refused() {
    let mut session = session_with_tiny_stack();
    let (name, message) = error_name_and_message(&session.fit_accept(&[1, 2, 3]).unwrap_err());
    assert_eq!(name, "InternalError");
    assert!(message.contains("no fit has begun"), "{message}");
    let count = session.fit_begin(js(&page_settings("p4m", 4, 4, 2)), &keep_going()).unwrap();
    let task = session.fit_task(0).unwrap().to_vec();
    let mut solver = orbitspan_wasm::FitTaskSolver::new();
    let (_, message) = error_name_and_message(&solver.solve(&task[..10]).unwrap_err());
    assert!(message.contains("cut short"), "{message}");
    // Bad settings are the fit's own errors, before any task exists.
    let (name, message) =
        error_name_and_message(&session.fit_begin(js(&page_settings("p4m", 3, 3, 2)), &keep_going()).unwrap_err());
    assert_eq!(name, "BadInput");
    assert!(!message.is_empty());
    assert!(session.fit_task(count - 1).is_err(), "a failed begin leaves no half fit");
}
