//! Checks against references outside the project.
//!
//! - NumPy `numpy.linalg.svd`: with plane group p1 and the whole image as the
//!   cell, the lattice is trivial and the fit is the Eckart–Young best
//!   L-dimensional subspace, so `E(L)` is the tail sum of squared singular
//!   values of the data matrix (one row per image).
//! - NumPy `numpy.fft.fft2`: the core's unnormalised forward DFT.
//! - A textbook worked SVD example.
//!
//! The NumPy fixtures are written by `tests/reference/make_fixtures.py`
//! (committed, re-runnable) into `tests/reference/fixtures/`.

use orbitspan_core::fit::fit;
use orbitspan_core::plane_group::PlaneGroup;
use orbitspan_core::spectrum::fft2;
use orbitspan_core::{FitSettings, Image, Silent, Stack};
use serde_json::Value;

fn fixture(name: &str) -> Value {
    let path = std::path::Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("../../tests/reference/fixtures")
        .join(name);
    let text = std::fs::read_to_string(&path).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
    serde_json::from_str(&text).unwrap_or_else(|e| panic!("{}: {e}", path.display()))
}

fn numbers(value: &Value) -> Vec<f64> {
    value.as_array().expect("array").iter().map(|v| v.as_f64().expect("number")).collect()
}

fn usize_of(value: &Value) -> usize {
    value.as_u64().expect("integer") as usize
}

/// p1 with the cell equal to the whole image: `Λ = {0}`, `G` trivial.
fn whole_image_p1(height: usize, width: usize, generators: usize) -> FitSettings {
    FitSettings {
        group: PlaneGroup::parse("p1").unwrap(),
        cell_rows: height,
        cell_cols: width,
        origin: [0, 0],
        generators,
        band: None,
        lattice_coords: false,
    }
}

/// The fitted error curve `E(1..=L)` of a stack of `h x w` images given as
/// rows of pixels.
fn error_curve(height: usize, width: usize, rows: &[Vec<f64>], generators: usize) -> Vec<f64> {
    let items = rows
        .iter()
        .enumerate()
        .map(|(i, px)| (format!("image-{}", i + 1), Image::new(height, width, px.clone())))
        .collect();
    let stack = Stack::new(items).unwrap();
    let result = fit(&stack, &whole_image_p1(height, width, generators), &mut Silent).unwrap();
    let curve = &result.report.error_curve;
    assert_eq!(curve.len(), generators);
    for (i, point) in curve.iter().enumerate() {
        assert_eq!(point.generators, i + 1);
    }
    curve.iter().map(|p| p.error).collect()
}

/// `|got − want| ≤ rel · want + floor`, where `floor` covers round-off on a
/// value that is zero in exact arithmetic.
fn assert_close(what: &str, got: f64, want: f64, rel: f64, floor: f64) {
    assert!(
        (got - want).abs() <= rel * want.abs() + floor,
        "{what}: got {got:e}, want {want:e} (difference {:e})",
        (got - want).abs()
    );
}

/// Source: NumPy numpy.linalg.svd (fixture svd_stack.json). Eckart–Young:
/// the best L-dimensional subspace leaves `Σ_{k>L} σ_k²`.
#[test]
fn p1_whole_image_cell_error_curve_equals_numpy_svd_tail_sums() {
    let fx = fixture("svd_stack.json");
    let (h, w) = (usize_of(&fx["height"]), usize_of(&fx["width"]));
    let rows: Vec<Vec<f64>> = fx["images"].as_array().unwrap().iter().map(numbers).collect();
    let tails = numbers(&fx["tail_sums"]);
    let total = fx["total_energy"].as_f64().unwrap();
    assert_eq!(rows.len(), 5);
    assert_eq!(tails.len(), 5);

    let curve = error_curve(h, w, &rows, tails.len());
    for (l, (&got, &want)) in curve.iter().zip(&tails).enumerate() {
        assert_close(&format!("E({})", l + 1), got, want, 1e-9, 1e-12 * total);
    }
}

/// Source: NumPy numpy.fft.fft2 (fixture fft2.json), unnormalised forward
/// DFT `F(ξ) = Σ_x f(x) e^{−2πi (ξ1 x1/n1 + ξ2 x2/n2)}`, row-major.
#[test]
fn fft2_agrees_with_numpy() {
    let fx = fixture("fft2.json");
    let (h, w) = (usize_of(&fx["height"]), usize_of(&fx["width"]));
    let image = Image::new(h, w, numbers(&fx["image"]));
    let (re, im) = (numbers(&fx["re"]), numbers(&fx["im"]));

    let spectrum = fft2(&image);
    assert_eq!(spectrum.len(), h * w);
    let scale = re.iter().chain(&im).fold(0.0f64, |m, v| m.max(v.abs()));
    for k in 0..h * w {
        let what = format!("F({}, {})", k / w, k % w);
        assert_close(&format!("{what}.re"), spectrum[k].re, re[k], 0.0, 1e-12 * scale);
        assert_close(&format!("{what}.im"), spectrum[k].im, im[k], 0.0, 1e-12 * scale);
    }
}

/// Textbook worked example, from memory: A = [[3, 2, 2], [2, 3, −2]] has
/// singular values 5 and 3 (A Aᵀ = [[17, 8], [8, 17]], eigenvalues 25 and 9);
/// it is the worked SVD example in Gilbert Strang's linear algebra texts
/// (e.g. "Introduction to Linear Algebra", chapter on the SVD).
///
/// The fit's data matrix has one row per image. With the two rows of A as
/// two 1x3 images the data matrix is A; with the three columns as three 1x2
/// images it is Aᵀ. Both have singular values 5 and 3, so in both cases
/// E(1) = σ₂² = 9 and E(2) = 0, out of the total energy ‖A‖²_F = 34.
#[test]
fn textbook_svd_example_rows_and_columns_as_the_stack() {
    let a = [[3.0, 2.0, 2.0], [2.0, 3.0, -2.0]];

    let rows: Vec<Vec<f64>> = a.iter().map(|r| r.to_vec()).collect();
    let curve = error_curve(1, 3, &rows, 2);
    assert_close("rows as images: E(1)", curve[0], 9.0, 1e-9, 0.0);
    assert_close("rows as images: E(2)", curve[1], 0.0, 0.0, 1e-12 * 34.0);

    let columns: Vec<Vec<f64>> = (0..3).map(|c| vec![a[0][c], a[1][c]]).collect();
    let curve = error_curve(1, 2, &columns, 2);
    assert_close("columns as images: E(1)", curve[0], 9.0, 1e-9, 0.0);
    assert_close("columns as images: E(2)", curve[1], 0.0, 0.0, 1e-12 * 34.0);
}
