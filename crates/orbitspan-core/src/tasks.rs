//! The fit as independent tasks for workers that share no memory (the
//! page's web workers, each with its own wasm instance).
//!
//! [`FitTasks`] transforms the images once, then cuts the orbit pairs of
//! [`crate::fit`] (each orbit with its conjugate) into tasks. A task's bytes
//! hold a header (image size, settings, the pairs) and, per pair, the kept
//! fibers of every image ([`crate::pair_fibers`]: half of the pair's
//! points, the others are their conjugates): everything a worker needs, in
//! about `1/tasks` of the stack's half spectra. [`TaskSolver::solve`] rebuilds
//! the symmetry from the header, runs the same per-pair code as the
//! in-process fit on those fibers and answers with each orbit's result.
//! [`FitTasks::accept`] stores the answers in any order and
//! [`FitTasks::finish`] sums them in orbit order, so the fit is
//! bit-identical to [`crate::fit::fit_with_path`] however the tasks were
//! spread (the fibers are copied, never recomputed).
//!
//! Bytes are little-endian. Task: `TASK_MAGIC`, the header's length (u32)
//! and JSON, then per pair and image the pair's kept fibers (per kept point
//! `d` complex values in the order of [`crate::lattice::Lattice::dual`],
//! each as two f64). Answer:
//! `ANSWER_MAGIC`, the orbit count (u32), then per orbit: index, `lmax`,
//! images, `d` (u32 each), tail, `lmax` layer energies, per-image discarded
//! energies (f64), and per layer the realness defect (f64, see
//! `frame::make_hermitian`), the layer's dimension and the number of
//! columns (u32) and the columns at the orbit's primary points (complex; the fit keeps the generators' shares
//! there only, see `frame::GeneratorSpectra`).
//!
//! Once every orbit is answered, the generator images can be made by the
//! workers too, one task per generator ([`FitTasks::generator_task`]; the
//! inverse transforms are most of what is left of the fit). Generator task:
//! `IMAGE_TASK_MAGIC`, the header's length (u32) and JSON (image size,
//! settings, the generator's index), the realness defect (f64), then per
//! orbit the number of columns of the generator's layer of its share (u32,
//! 0 for none) and the columns at the orbit's primary points (complex).
//! Answer: `IMAGE_ANSWER_MAGIC`, the index, height and width (u32), the
//! imaginary part (f64, see `frame::Generator`) and the pixels (f64, row
//! by row). [`TaskSolver::solve`] and [`FitTasks::accept`] take both kinds.

use crate::error::{Error, Result};
use crate::fiber::{for_each_parallel, Symmetry};
use crate::fit::{solve_kept_pair, validate, Collected, FiberPath, Fit, OrbitResult, Prepared};
use crate::pair_fibers::kept_len;
use crate::frame::{self, Generator, References};
use crate::progress::Progress;
use crate::settings::FitSettings;
use crate::stack::{Image, Stack};
use nalgebra::DMatrix;
use num_complex::Complex64;
use serde::{Deserialize, Serialize};
use std::ops::Range;

const TASK_MAGIC: &[u8; 8] = b"OSTASK01";
const ANSWER_MAGIC: &[u8; 8] = b"OSDONE01";
const IMAGE_TASK_MAGIC: &[u8; 8] = b"OSGTSK01";
const IMAGE_ANSWER_MAGIC: &[u8; 8] = b"OSGIMG01";

/// Aim for this many tasks (enough to keep 8 workers busy with uneven
/// tasks), more when a task would hold more than [`TASK_BYTES`].
const TARGET_TASKS: usize = 32;
const TASK_BYTES: usize = 8 << 20;

/// What a worker needs besides the fibers.
#[derive(Serialize, Deserialize)]
struct Header {
    height: usize,
    width: usize,
    settings: FitSettings,
    path: String,
    images: usize,
    pairs: Vec<Vec<usize>>,
}

/// What a worker needs besides the shares to make one generator's image.
#[derive(Serialize, Deserialize)]
struct ImageHeader {
    height: usize,
    width: usize,
    settings: FitSettings,
    generator: usize,
}

fn path_name(path: FiberPath) -> &'static str {
    match path {
        FiberPath::Auto => "auto",
        FiberPath::Covariance => "covariance",
        FiberPath::Gram => "gram",
    }
}

fn path_of(name: &str) -> Result<FiberPath> {
    match name {
        "auto" => Ok(FiberPath::Auto),
        "covariance" => Ok(FiberPath::Covariance),
        "gram" => Ok(FiberPath::Gram),
        other => Err(corrupt(format!("unknown fiber path '{other}'"))),
    }
}

fn corrupt(problem: impl std::fmt::Display) -> Error {
    Error::Internal(format!("fit task data: {problem}"))
}

/// A fit in progress whose orbit work is handed out as tasks.
pub struct FitTasks {
    prepared: Prepared,
    /// Per task, its range of the prepared fit's pairs.
    tasks: Vec<Range<usize>>,
    /// Per task, whether its bytes were handed out (its pairs' fibers are
    /// then dropped: each task is handed out once).
    given: Vec<bool>,
    /// Per generator, whether its image task was handed out.
    images_given: Vec<bool>,
    collected: Collected,
}

impl FitTasks {
    /// Validates and transforms the images (progress stage "transforming
    /// images"); the same errors as [`crate::fit::fit`].
    pub fn new(stack: &Stack, settings: &FitSettings, progress: &mut dyn Progress) -> Result<FitTasks> {
        Self::with_path(stack, settings, FiberPath::Auto, progress)
    }

    /// [`FitTasks::new`] with a forced choice of covariance or Gram matrices.
    pub fn with_path(stack: &Stack, settings: &FitSettings, path: FiberPath, progress: &mut dyn Progress) -> Result<FitTasks> {
        let prepared = Prepared::new(stack, settings, path, progress)?;
        let pairs = &prepared.pairs;
        let m = prepared.images;
        let d = prepared.sym.lattice().fiber_len();
        let n = d.min(m * prepared.sym.order());
        // Work per orbit: pooling r m fibers into an n x n matrix, and its
        // decomposition (a cost model for splitting, not a measurement).
        let cost = |pair: &Vec<usize>| -> f64 {
            pair.iter()
                .map(|&o| (prepared.orbits[o].points.len() * m * d * n) as f64 + (n * n * n) as f64)
                .sum()
        };
        let total_bytes: usize = (0..pairs.len()).map(|k| prepared.fibers.pair(k).len() * 16).sum();
        let count = TARGET_TASKS.max(total_bytes.div_ceil(TASK_BYTES)).min(pairs.len()).max(1);
        let costs: Vec<f64> = pairs.iter().map(cost).collect();
        let share = costs.iter().sum::<f64>() / count as f64;
        let mut tasks = Vec::with_capacity(count);
        let (mut start, mut acc) = (0, 0.0);
        for (k, c) in costs.iter().enumerate() {
            acc += c;
            if acc >= share * (tasks.len() + 1) as f64 && tasks.len() + 1 < count {
                tasks.push(start..k + 1);
                start = k + 1;
            }
        }
        if start < pairs.len() || tasks.is_empty() {
            tasks.push(start..pairs.len());
        }
        let collected = Collected::new(&prepared);
        let given = vec![false; tasks.len()];
        let images_given = vec![false; prepared.lmax];
        Ok(FitTasks { prepared, tasks, given, images_given, collected })
    }

    /// The number of tasks.
    pub fn len(&self) -> usize {
        self.tasks.len()
    }

    /// Whether there are no tasks (never: every fit has the zero frequency).
    pub fn is_empty(&self) -> bool {
        self.tasks.is_empty()
    }

    /// The bytes of task `k` (see the module documentation). Each task is
    /// handed out once: its pairs' fibers are dropped with it, so the
    /// fibers held shrink as the tasks go out.
    pub fn task(&mut self, k: usize) -> Result<Vec<u8>> {
        let mut out = Vec::new();
        self.task_into(k, |total, piece| {
            out.reserve_exact(total - out.len());
            out.extend_from_slice(piece)
        })?;
        Ok(out)
    }

    /// Task `k`'s bytes as [`FitTasks::task`] makes them, handed piece by
    /// piece to `piece` in order, each with the total length (so that they
    /// can be written straight where they go, without a second buffer of
    /// tens of megabytes).
    pub fn task_into(&mut self, k: usize, mut piece: impl FnMut(usize, &[u8])) -> Result<()> {
        let range = self
            .tasks
            .get(k)
            .cloned()
            .ok_or_else(|| Error::Internal(format!("no fit task {k}: there are {}", self.tasks.len())))?;
        if self.given[k] {
            return Err(Error::Internal(format!("fit task {k} was handed out already (each task is handed out once)")));
        }
        let p = &self.prepared;
        let header = Header {
            height: p.height,
            width: p.width,
            settings: p.settings.clone(),
            path: path_name(p.path).into(),
            images: p.images,
            pairs: p.pairs[range.clone()].to_vec(),
        };
        let json = serde_json::to_vec(&header).map_err(|e| Error::Internal(format!("fit task header: {e}")))?;
        let values: usize = range.clone().map(|k| p.fibers.pair(k).len()).sum();
        let mut head = Vec::with_capacity(12 + json.len());
        head.extend_from_slice(TASK_MAGIC);
        put_u32(&mut head, json.len());
        head.extend_from_slice(&json);
        let total = head.len() + values * 16;
        piece(total, &head);
        let mut converted = Vec::new();
        for k in range.clone() {
            piece(total, complex_bytes(p.fibers.pair(k), &mut converted));
        }
        for k in range {
            self.prepared.fibers.drop_pair(k);
        }
        self.given[k] = true;
        Ok(())
    }

    /// The bytes of generator `l`'s image task (see the module
    /// documentation), once every orbit is answered. The generator's layer
    /// of the shares goes out with it; each is handed out once. Generators
    /// not handed out are made by [`FitTasks::finish`].
    pub fn generator_task(&mut self, l: usize) -> Result<Vec<u8>> {
        let missing = self.collected.missing();
        if missing > 0 {
            return Err(Error::Internal(format!("generator task {l}: {missing} frequency orbits have no result yet")));
        }
        let p = &self.prepared;
        if l >= p.lmax {
            return Err(Error::Internal(format!("no generator task {l}: there are {}", p.lmax)));
        }
        if self.images_given[l] {
            return Err(Error::Internal(format!("generator task {l} was handed out already (each task is handed out once)")));
        }
        let header = ImageHeader { height: p.height, width: p.width, settings: p.settings.clone(), generator: l };
        let json = serde_json::to_vec(&header).map_err(|e| Error::Internal(format!("generator task header: {e}")))?;
        let defect = self.collected.defect(l);
        let shares = self.collected.take_generator_layer(l);
        let values: usize = shares.iter().flatten().map(|m| m.len()).sum();
        let mut out = Vec::with_capacity(20 + json.len() + 4 * shares.len() + values * 16);
        out.extend_from_slice(IMAGE_TASK_MAGIC);
        put_u32(&mut out, json.len());
        out.extend_from_slice(&json);
        out.extend_from_slice(&defect.to_le_bytes());
        for share in &shares {
            put_u32(&mut out, share.as_ref().map_or(0, |m| m.ncols()));
            if let Some(m) = share {
                put_complex(&mut out, m.as_slice());
            }
        }
        self.images_given[l] = true;
        Ok(out)
    }

    /// Stores one task's answer: the orbit results of a fit task, or the
    /// image of a generator task.
    pub fn accept(&mut self, answer: &[u8]) -> Result<()> {
        let p = &self.prepared;
        let d = p.sym.lattice().fiber_len();
        let mut r = Reader::new(answer);
        let magic = r.take(8)?;
        if magic == IMAGE_ANSWER_MAGIC {
            return self.accept_image(&mut r);
        }
        if magic != ANSWER_MAGIC {
            return Err(corrupt("not a fit task answer"));
        }
        let count = r.u32()?;
        let mut parsed = Vec::with_capacity(count);
        for _ in 0..count {
            let o = r.u32()?;
            if o >= p.orbits.len() {
                return Err(corrupt(format!("no orbit {o}")));
            }
            let (lmax, m, dd) = (r.u32()?, r.u32()?, r.u32()?);
            if lmax != p.lmax || m != p.images || dd != d {
                return Err(corrupt(format!(
                    "orbit {o}: the answer is for {lmax} generators, {m} images, {dd}-pixel cells; the fit has {}, {}, {d}",
                    p.lmax, p.images
                )));
            }
            let (result, kept) = read_result(&mut r, o, self.collected.primary(o).len(), lmax, m, d)?;
            parsed.push((o, result, kept));
        }
        if !r.is_done() {
            return Err(corrupt("bytes left after the last orbit"));
        }
        for (o, result, kept) in parsed {
            self.collected.absorb_kept(o, result, kept);
        }
        Ok(())
    }

    /// A generator task's answer (after its magic).
    fn accept_image(&mut self, r: &mut Reader) -> Result<()> {
        let p = &self.prepared;
        let (l, h, w) = (r.u32()?, r.u32()?, r.u32()?);
        if l >= p.lmax || !self.images_given[l] {
            return Err(corrupt(format!("generator {} was not handed out by this fit", l + 1)));
        }
        if self.collected.has_generator(l) {
            return Err(corrupt(format!("generator {} was answered already", l + 1)));
        }
        if (h, w) != (p.height, p.width) {
            return Err(corrupt(format!("generator {}: the answer is {h}x{w}, the fit's images are {}x{}", l + 1, p.height, p.width)));
        }
        let imaginary_part = r.f64()?;
        let pixels = r.f64s(h * w)?;
        if !r.is_done() {
            return Err(corrupt("bytes left after the generator's pixels"));
        }
        self.collected.put_generator(l, Generator { image: Image::new(h, w, pixels), imaginary_part });
        Ok(())
    }

    /// How many orbits have no result yet.
    pub fn missing(&self) -> usize {
        self.collected.missing()
    }

    /// The number of generators (of generator tasks).
    pub fn generators(&self) -> usize {
        self.prepared.lmax
    }

    /// The fit from every task's answer (progress stage "building
    /// generators"): the generators not handed out as tasks are made here.
    /// A generator task handed out but not answered is an error.
    pub fn finish(self, progress: &mut dyn Progress) -> Result<Fit> {
        let unanswered = (0..self.prepared.lmax).filter(|&l| self.images_given[l] && !self.collected.has_generator(l)).count();
        if unanswered > 0 {
            return Err(Error::Internal(format!("{unanswered} generator tasks handed out have no answer")));
        }
        self.prepared.finish(self.collected, progress)
    }
}

/// One orbit's result from an answer, and its generator share at the
/// orbit's `primary` points (per layer).
fn read_result(r: &mut Reader, o: usize, primary: usize, lmax: usize, m: usize, d: usize) -> Result<(OrbitResult, Vec<Option<DMatrix<Complex64>>>)> {
    let tail = r.f64()?;
    let layer_energy = (0..lmax).map(|_| r.f64()).collect::<Result<Vec<_>>>()?;
    let image_discarded = (0..m).map(|_| r.f64()).collect::<Result<Vec<_>>>()?;
    let mut layer_dims = Vec::with_capacity(lmax);
    let mut kept = Vec::with_capacity(lmax);
    let mut realness_defect = Vec::with_capacity(lmax);
    for _ in 0..lmax {
        realness_defect.push(r.f64()?);
        let dim = r.u32()?;
        let cols = r.u32()?;
        if cols != 0 && cols != primary {
            return Err(corrupt(format!("orbit {o}: {cols} generator columns for {primary} primary points")));
        }
        let values = r.complexes(d * cols)?;
        layer_dims.push(dim);
        kept.push((cols > 0).then(|| DMatrix::from_vec(d, cols, values)));
    }
    let result = OrbitResult { layer_energy, tail, image_discarded, layer_dims, generator: Vec::new(), realness_defect };
    Ok((result, kept))
}

/// Solves tasks.
#[derive(Default)]
pub struct TaskSolver {}

impl TaskSolver {
    pub fn new() -> TaskSolver {
        TaskSolver::default()
    }

    /// The answer to one task (see the module documentation).
    pub fn solve(&mut self, task: &[u8]) -> Result<Vec<u8>> {
        let mut r = Reader::new(task);
        let magic = r.take(8)?;
        if magic == IMAGE_TASK_MAGIC {
            return solve_image(&mut r);
        }
        if magic != TASK_MAGIC {
            return Err(corrupt("not a fit task"));
        }
        let len = r.u32()?;
        let header: Header = serde_json::from_slice(r.take(len)?).map_err(|e| corrupt(format!("header: {e}")))?;
        let path = path_of(&header.path)?;
        let sym: Symmetry = validate(header.height, header.width, &header.settings)?;
        let orbits = sym.orbits();
        let lattice = sym.lattice();
        let d = lattice.fiber_len();
        let (m, lmax) = (header.images, header.settings.generators);
        for &o in header.pairs.iter().flatten() {
            if o >= orbits.len() {
                return Err(corrupt(format!("no orbit {o}: there are {}", orbits.len())));
            }
        }
        let references = &References::new(lattice.torus());
        // Each pair's kept fibers (image-major, see `pair_fibers`).
        let mut inputs = Vec::with_capacity(header.pairs.len());
        for pair in &header.pairs {
            inputs.push(r.complexes(kept_len(&sym, &orbits, pair) * m)?);
        }
        if !r.is_done() {
            return Err(corrupt("bytes left after the last pair"));
        }
        let mut answers: Vec<Option<Vec<(usize, OrbitResult)>>> = (0..inputs.len()).map(|_| None).collect();
        for_each_parallel(
            inputs.len(),
            |k| solve_kept_pair(&sym, &orbits, &header.pairs[k], &inputs[k], m, lmax, path, references),
            |k, answer| {
                answers[k] = Some(answer?);
                Ok::<(), Error>(())
            },
        )?;
        let results: Vec<(usize, OrbitResult)> = answers.into_iter().flatten().flatten().collect();
        let mut out = Vec::new();
        out.extend_from_slice(ANSWER_MAGIC);
        put_u32(&mut out, results.len());
        for (o, result) in &results {
            for v in [*o, lmax, m, d] {
                put_u32(&mut out, v);
            }
            out.extend_from_slice(&result.tail.to_le_bytes());
            for v in result.layer_energy.iter().chain(&result.image_discarded) {
                out.extend_from_slice(&v.to_le_bytes());
            }
            let primary = frame::primary_points(&sym, &orbits[*o]);
            for ((dim, (_, columns)), defect) in result.layer_dims.iter().zip(&result.generator).zip(&result.realness_defect) {
                out.extend_from_slice(&defect.to_le_bytes());
                put_u32(&mut out, *dim);
                if columns.ncols() == 0 {
                    put_u32(&mut out, 0);
                    continue;
                }
                put_u32(&mut out, primary.len());
                for &j in &primary {
                    put_complex(&mut out, columns.column(j).as_slice());
                }
            }
        }
        Ok(out)
    }
}

/// The answer to a generator task (after its magic): the same image as the
/// in-process fit makes ([`frame::generator_image`]).
fn solve_image(r: &mut Reader) -> Result<Vec<u8>> {
    let len = r.u32()?;
    let header: ImageHeader = serde_json::from_slice(r.take(len)?).map_err(|e| corrupt(format!("generator header: {e}")))?;
    let sym: Symmetry = validate(header.height, header.width, &header.settings)?;
    let orbits = sym.orbits();
    let d = sym.lattice().fiber_len();
    let defect = r.f64()?;
    let primary: Vec<Vec<usize>> = orbits.iter().map(|orbit| frame::primary_points(&sym, orbit)).collect();
    let mut shares = Vec::with_capacity(orbits.len());
    for (o, points) in primary.iter().enumerate() {
        let cols = r.u32()?;
        if cols != 0 && cols != points.len() {
            return Err(corrupt(format!("orbit {o}: {cols} generator columns for {} primary points", points.len())));
        }
        let values = r.complexes(d * cols)?;
        shares.push((cols > 0).then(|| DMatrix::from_vec(d, cols, values)));
    }
    if !r.is_done() {
        return Err(corrupt("bytes left after the last orbit's share"));
    }
    let g = frame::generator_image(&sym, &orbits, &primary, shares, defect, header.settings.origin);
    let mut out = Vec::with_capacity(28 + 8 * g.image.pixels.len());
    out.extend_from_slice(IMAGE_ANSWER_MAGIC);
    for v in [header.generator, g.image.height, g.image.width] {
        put_u32(&mut out, v);
    }
    out.extend_from_slice(&g.imaginary_part.to_le_bytes());
    put_f64s(&mut out, &g.image.pixels);
    Ok(out)
}

fn put_u32(out: &mut Vec<u8>, v: usize) {
    out.extend_from_slice(&(v as u32).to_le_bytes());
}

/// Appends `values` as little-endian f64s (a task's fibers are tens of
/// megabytes: on a little-endian machine, such as WebAssembly's, one copy).
fn put_f64s(out: &mut Vec<u8>, values: &[f64]) {
    if cfg!(target_endian = "little") {
        out.extend_from_slice(bytemuck::cast_slice(values));
    } else {
        values.iter().for_each(|v| out.extend_from_slice(&v.to_le_bytes()));
    }
}

/// Appends `values` as pairs of little-endian f64s (real, imaginary; the
/// memory layout of `Complex64`).
fn put_complex(out: &mut Vec<u8>, values: &[Complex64]) {
    put_f64s(out, bytemuck::cast_slice(values));
}

/// `values` as [`put_complex`] writes them: their own memory on a
/// little-endian machine, else converted into `scratch`.
fn complex_bytes<'a>(values: &'a [Complex64], scratch: &'a mut Vec<u8>) -> &'a [u8] {
    if cfg!(target_endian = "little") {
        return bytemuck::cast_slice(values);
    }
    scratch.clear();
    put_complex(scratch, values);
    scratch
}

/// Reads little-endian numbers; running out of bytes is an error.
struct Reader<'a> {
    bytes: &'a [u8],
    at: usize,
}

impl<'a> Reader<'a> {
    fn new(bytes: &'a [u8]) -> Reader<'a> {
        Reader { bytes, at: 0 }
    }
    fn take(&mut self, n: usize) -> Result<&'a [u8]> {
        let end = self.at.checked_add(n).filter(|&e| e <= self.bytes.len()).ok_or_else(|| {
            corrupt(format!("cut short: {} bytes, needed {} more at byte {}", self.bytes.len(), n, self.at))
        })?;
        let out = &self.bytes[self.at..end];
        self.at = end;
        Ok(out)
    }
    fn u32(&mut self) -> Result<usize> {
        Ok(u32::from_le_bytes(self.take(4)?.try_into().expect("4 bytes")) as usize)
    }
    fn f64(&mut self) -> Result<f64> {
        Ok(f64::from_le_bytes(self.take(8)?.try_into().expect("8 bytes")))
    }
    /// `n` f64s, read in one piece.
    fn f64s(&mut self, n: usize) -> Result<Vec<f64>> {
        let bytes = self.take(n.checked_mul(8).ok_or_else(|| corrupt("a length beyond memory"))?)?;
        if cfg!(target_endian = "little") {
            // (One copy into aligned memory: the bytes may sit anywhere.)
            return Ok(bytemuck::pod_collect_to_vec(bytes));
        }
        Ok(bytes.chunks_exact(8).map(|c| f64::from_le_bytes(c.try_into().expect("8 bytes"))).collect())
    }
    /// `n` complex values (see [`put_complex`]), read in one piece.
    fn complexes(&mut self, n: usize) -> Result<Vec<Complex64>> {
        let bytes = self.take(n.checked_mul(16).ok_or_else(|| corrupt("a length beyond memory"))?)?;
        if cfg!(target_endian = "little") {
            return Ok(bytemuck::pod_collect_to_vec(bytes));
        }
        Ok(bytes
            .chunks_exact(16)
            .map(|c| {
                let re = f64::from_le_bytes(c[..8].try_into().expect("8 bytes"));
                let im = f64::from_le_bytes(c[8..].try_into().expect("8 bytes"));
                Complex64::new(re, im)
            })
            .collect())
    }
    fn is_done(&self) -> bool {
        self.at == self.bytes.len()
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::fit::fit_with_path;
    use crate::plane_group::{GroupSymbol, PlaneGroup};
    use crate::prng::SplitMix64;
    use crate::progress::Silent;
    use crate::settings::BandSpec;

    fn stack(n: [usize; 2], count: usize, seed: u64) -> Stack {
        let mut rng = SplitMix64(seed);
        Stack::new(
            (0..count)
                .map(|i| (format!("img{i}"), Image::new(n[0], n[1], (0..n[0] * n[1]).map(|_| rng.between(-1.0, 1.0)).collect())))
                .collect(),
        )
        .unwrap()
    }

    fn settings(symbol: GroupSymbol, cell: [usize; 2], generators: usize) -> FitSettings {
        FitSettings {
            group: PlaneGroup::standard(symbol),
            cell_rows: cell[0],
            cell_cols: cell[1],
            origin: [1, 2],
            generators,
            band: None,
            lattice_coords: symbol.is_hexagonal(),
        }
    }

    /// Runs every task through bytes, answers accepted in reverse order;
    /// then the generator tasks of the generators `images` picks, the rest
    /// made by `finish`.
    fn fit_by_tasks(stack: &Stack, s: &FitSettings, path: FiberPath, images: impl Fn(usize) -> bool) -> Fit {
        let mut tasks = FitTasks::with_path(stack, s, path, &mut Silent).unwrap();
        assert!(tasks.len() > 1, "the example is cut into several tasks");
        let mut solver = TaskSolver::new();
        let answers: Vec<Vec<u8>> = (0..tasks.len()).map(|k| solver.solve(&tasks.task(k).unwrap()).unwrap()).collect();
        for answer in answers.iter().rev() {
            tasks.accept(answer).unwrap();
        }
        assert_eq!(tasks.missing(), 0);
        assert_eq!(tasks.generators(), s.generators);
        let picked: Vec<usize> = (0..tasks.generators()).filter(|&l| images(l)).collect();
        let answers: Vec<Vec<u8>> = picked.iter().map(|&l| solver.solve(&tasks.generator_task(l).unwrap()).unwrap()).collect();
        for answer in answers.iter().rev() {
            tasks.accept(answer).unwrap();
        }
        tasks.finish(&mut Silent).unwrap()
    }

    fn assert_identical(a: &Fit, b: &Fit, what: &str) {
        assert_eq!(a.report, b.report, "{what}: reports differ");
        assert_eq!(a.model.generators(), b.model.generators(), "{what}: generators differ");
    }

    #[test]
    fn tasks_give_the_fit_bit_for_bit() {
        let cases = [
            (GroupSymbol::P4m, [16, 16], [4, 4], 3, 3, FiberPath::Auto),
            (GroupSymbol::P4g, [16, 16], [4, 4], 5, 2, FiberPath::Covariance),
            (GroupSymbol::Pmm, [12, 8], [4, 4], 2, 4, FiberPath::Gram),
            (GroupSymbol::P6m, [12, 12], [4, 4], 3, 2, FiberPath::Auto),
            (GroupSymbol::P1, [10, 10], [2, 5], 4, 2, FiberPath::Auto),
            (GroupSymbol::Cm, [16, 16], [4, 4], 3, 2, FiberPath::Auto),
        ];
        for (k, &(symbol, n, cell, count, l, path)) in cases.iter().enumerate() {
            let stack = stack(n, count, 100 + k as u64);
            let s = settings(symbol, cell, l);
            let direct = fit_with_path(&stack, &s, path, &mut Silent).unwrap();
            // Generator images made here, by tasks, or some of each.
            assert_identical(&direct, &fit_by_tasks(&stack, &s, path, |_| false), &format!("{symbol:?}"));
            assert_identical(&direct, &fit_by_tasks(&stack, &s, path, |_| true), &format!("{symbol:?}, generator tasks"));
            assert_identical(&direct, &fit_by_tasks(&stack, &s, path, |l| l % 2 == 1), &format!("{symbol:?}, some generator tasks"));
        }
        // Band-limited: the band's restriction happens before the tasks.
        let stack = stack([16, 16], 3, 7);
        let s = FitSettings { band: Some(BandSpec::Frequencies(60)), ..settings(GroupSymbol::P4m, [4, 4], 2) };
        let direct = fit_with_path(&stack, &s, FiberPath::Auto, &mut Silent).unwrap();
        assert_identical(&direct, &fit_by_tasks(&stack, &s, FiberPath::Auto, |l| l == 0), "band-limited p4m");
    }

    #[test]
    fn damaged_task_bytes_are_refused_with_the_problem() {
        let stack = stack([16, 16], 2, 3);
        let s = settings(GroupSymbol::P4m, [4, 4], 2);
        let mut tasks = FitTasks::new(&stack, &s, &mut Silent).unwrap();
        let task = tasks.task(0).unwrap();
        assert!(tasks.task(0).unwrap_err().to_string().contains("handed out already"));
        let mut solver = TaskSolver::new();
        let short = solver.solve(&task[..task.len() - 5]).unwrap_err().to_string();
        assert!(short.contains("cut short"), "{short}");
        let mut long = task.clone();
        long.push(0);
        assert!(solver.solve(&long).unwrap_err().to_string().contains("bytes left"));
        assert!(solver.solve(b"nonsense").unwrap_err().to_string().contains("not a fit task"));
        let answer = solver.solve(&task).unwrap();
        assert!(tasks.accept(&answer[..answer.len() - 1]).unwrap_err().to_string().contains("cut short"));
        assert!(tasks.task(tasks.len()).is_err());
        // Answers for another fit's shape are refused, not mixed in.
        let mut other = FitTasks::new(&stack, &settings(GroupSymbol::P4m, [4, 4], 3), &mut Silent).unwrap();
        let foreign = solver.solve(&other.task(0).unwrap()).unwrap();
        assert!(tasks.accept(&foreign).unwrap_err().to_string().contains("3 generators"));
        // A fit with an orbit unanswered does not finish.
        tasks.accept(&answer).unwrap();
        let missing = tasks.missing();
        assert!(missing > 0);
        assert!(tasks.generator_task(0).unwrap_err().to_string().contains("no result yet"));
        assert!(tasks.finish(&mut Silent).unwrap_err().to_string().contains("have no result"));
    }

    #[test]
    fn damaged_generator_tasks_are_refused_with_the_problem() {
        let stack = stack([16, 16], 2, 5);
        let s = settings(GroupSymbol::P4m, [4, 4], 3);
        let all_answered = || {
            let mut tasks = FitTasks::new(&stack, &s, &mut Silent).unwrap();
            let mut solver = TaskSolver::new();
            for k in 0..tasks.len() {
                let answer = solver.solve(&tasks.task(k).unwrap()).unwrap();
                tasks.accept(&answer).unwrap();
            }
            tasks
        };
        let mut tasks = all_answered();
        let mut solver = TaskSolver::new();
        assert!(tasks.generator_task(3).unwrap_err().to_string().contains("there are 3"));
        let task = tasks.generator_task(1).unwrap();
        assert!(tasks.generator_task(1).unwrap_err().to_string().contains("handed out already"));
        let short = solver.solve(&task[..task.len() - 3]).unwrap_err().to_string();
        assert!(short.contains("cut short"), "{short}");
        let mut long = task.clone();
        long.push(0);
        assert!(solver.solve(&long).unwrap_err().to_string().contains("bytes left"));
        let answer = solver.solve(&task).unwrap();
        assert!(tasks.accept(&answer[..answer.len() - 8]).unwrap_err().to_string().contains("cut short"));
        // An image for a generator this fit did not hand out, or for
        // another image size, is refused.
        let mut other = all_answered();
        let foreign = solver.solve(&other.generator_task(2).unwrap()).unwrap();
        assert!(tasks.accept(&foreign).unwrap_err().to_string().contains("not handed out"));
        let mut wide = FitTasks::new(&self::stack([20, 20], 2, 5), &s, &mut Silent).unwrap();
        for k in 0..wide.len() {
            let answer = solver.solve(&wide.task(k).unwrap()).unwrap();
            wide.accept(&answer).unwrap();
        }
        let wide_answer = solver.solve(&wide.generator_task(1).unwrap()).unwrap();
        assert!(tasks.accept(&wide_answer).unwrap_err().to_string().contains("20x20"));
        // A generator handed out and not answered keeps the fit from
        // finishing; answered twice is refused.
        let mut unanswered = all_answered();
        unanswered.generator_task(0).unwrap();
        assert!(unanswered.finish(&mut Silent).unwrap_err().to_string().contains("1 generator tasks"));
        tasks.accept(&answer).unwrap();
        assert!(tasks.accept(&answer).unwrap_err().to_string().contains("answered already"));
        // The fit finishes with the image from the task; the others made here.
        let fit = tasks.finish(&mut Silent).unwrap();
        assert_identical(&fit, &fit_with_path(&stack, &s, FiberPath::Auto, &mut Silent).unwrap(), "one generator by task");
    }
}
