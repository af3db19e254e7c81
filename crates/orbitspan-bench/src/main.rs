//! `orbitspan-bench`: the fit against its floor (the FFT of the stack) and
//! against the dense finite-group method, with peak memory and the doubling
//! test, on three invented workloads made from a fixed seed (issue 5).
//!
//! ```text
//! cargo run --release -p orbitspan-bench [-- --quick] [--reps N] [--only W1,W3,dense]
//!     [--write-files DIR] [--browser DIR]
//! ```
//! (or `cargo xtask bench`, which also runs the browser side). `--write-files`
//! writes the workloads as image files and stops; `--browser DIR` also times
//! the native fit of the stacks decoded from those files and sets it against
//! `DIR/browser.json` (see [`files`]). Writes `target/bench/bench.md` and
//! `target/bench/bench.json`, or, for a partial run (`--only`, `--quick`,
//! or without `--browser`), `bench-partial.md` and `bench-partial.json`.
//! Timings are medians over interleaved repetitions in one process; the
//! table reports ratios measured in the same run, since absolute times on a
//! shared machine are noisy.

#[path = "../../orbitspan-core/tests/support/dense.rs"]
mod dense;
mod files;
mod memory;
mod workload;

use orbitspan_core::fiber::Symmetry;
use orbitspan_core::spectrum::PackedPair;
use orbitspan_core::{fit, Silent, Stack};
use serde::Serialize;
use std::time::Instant;
use workload::Workload;

#[global_allocator]
static ALLOCATOR: memory::Counting = memory::Counting;

const USAGE: &str = "usage: orbitspan-bench [--quick] [--reps N] [--only W1,W2,W3,dense] [--write-files DIR] [--browser DIR]";

struct Options {
    quick: bool,
    reps: usize,
    only: Option<Vec<String>>,
    write_files: Option<std::path::PathBuf>,
    browser: Option<std::path::PathBuf>,
}

fn parse(args: &[String]) -> Result<Options, String> {
    let mut o = Options { quick: false, reps: 3, only: None, write_files: None, browser: None };
    let mut it = args.iter();
    while let Some(a) = it.next() {
        match a.as_str() {
            "--quick" => o.quick = true,
            "--reps" => {
                let v = it.next().ok_or("--reps needs a number")?;
                o.reps = v.parse().ok().filter(|&n: &usize| n >= 1).ok_or(format!("--reps: '{v}' is not a positive whole number"))?;
            }
            "--only" => {
                let v = it.next().ok_or("--only needs workload names, e.g. W1,W3 or dense")?;
                o.only = Some(v.split(',').map(|s| s.trim().to_uppercase()).collect());
            }
            "--write-files" => o.write_files = Some(it.next().ok_or("--write-files needs a directory")?.into()),
            "--browser" => o.browser = Some(it.next().ok_or("--browser needs the directory of --write-files")?.into()),
            other => return Err(format!("unknown argument '{other}'\n{USAGE}")),
        }
    }
    Ok(o)
}

/// One workload's measurements (seconds, bytes).
#[derive(Serialize)]
struct WorkloadResult {
    name: String,
    description: String,
    images: usize,
    fit_seconds: f64,
    /// The fit with its per-orbit work on one thread (the FFT-only pass is
    /// one thread too).
    one_thread_fit_seconds: f64,
    fft_seconds: f64,
    half_stack_fit_seconds: f64,
    stack_f32_bytes: usize,
    peak_heap_bytes: usize,
    peak_heap_during_fit_bytes: usize,
    /// One fit's seconds per progress stage (from each stage's first report to the next's).
    stages: Vec<(String, f64)>,
    fit_over_fft: f64,
    one_thread_fit_over_fft: f64,
    doubling: f64,
    memory_over_stack_f32: f64,
    memory_during_fit_over_stack_f32: f64,
}

/// The dense method against the fit on one small torus.
#[derive(Serialize)]
struct DenseResult {
    description: String,
    dense_seconds: f64,
    fit_seconds: f64,
    dense_over_fit: f64,
    /// `max_L |E_dense(L) − E_fit(L)| / E(0)`: both must give the same curve.
    curve_difference: f64,
}

#[derive(Serialize)]
struct Results {
    quick: bool,
    repetitions: usize,
    threads_available: usize,
    memory_method: &'static str,
    workloads: Vec<WorkloadResult>,
    dense: Vec<DenseResult>,
    browser: Vec<BrowserResult>,
    /// Why there is no browser table, when there is none.
    browser_note: Option<String>,
}

/// One workload in the browser (wasm, through the worker) against the
/// native fit of the same decoded files, timed in this process.
#[derive(Serialize)]
struct BrowserResult {
    name: String,
    images: usize,
    worker_seconds: f64,
    page_seconds: f64,
    /// The page's next requests after a fit: the first image's pictures and
    /// the model file (`None` when not measured).
    picture_seconds: Option<f64>,
    /// Then the next image's pictures.
    next_picture_seconds: Option<f64>,
    model_file_seconds: Option<f64>,
    native_seconds: f64,
    wasm_over_native: f64,
    /// The native fit on one thread, like the single wasm worker.
    native_one_thread_seconds: f64,
    wasm_over_native_one_thread: f64,
    wasm_memory_bytes: usize,
    stack_f32_bytes: usize,
    wasm_memory_over_stack_f32: f64,
    /// The fit spread over one worker per core, when there is more than one.
    spread: Option<SpreadResult>,
}

/// The fit spread over several workers against one worker, in the same page.
#[derive(Serialize)]
struct SpreadResult {
    workers: usize,
    seconds: f64,
    /// One worker's time over the spread fit's.
    speed_up: f64,
    /// Medians of the spread fit's breakdown.
    begin_seconds: f64,
    finish_seconds: f64,
    task_work_seconds: f64,
    /// Making the tasks' bytes and taking in their answers (in the worker
    /// that fits: serial).
    handling_seconds: f64,
    /// `t(1 worker) / (begin + finish + handling + task work / 8)`: an
    /// estimate for 8 cores, if the tasks divide evenly and nothing else
    /// grows.
    expected_speed_up_8: f64,
    memory_bytes: usize,
    memory_over_stack_f32: f64,
}

fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    let n = v.len();
    if n % 2 == 1 {
        v[n / 2]
    } else {
        0.5 * (v[n / 2 - 1] + v[n / 2])
    }
}

fn seconds(f: impl FnOnce()) -> f64 {
    let t = Instant::now();
    f();
    t.elapsed().as_secs_f64()
}

fn run_fit(stack: &Stack, w: &Workload) -> fit::Fit {
    fit(stack, &w.settings, &mut Silent).unwrap_or_else(|e| panic!("{}: fit failed: {e}", w.name))
}

/// One fit with the seconds spent in each progress stage, in stage order.
fn staged_fit(stack: &Stack, w: &Workload) -> Vec<(String, f64)> {
    let mut stages: Vec<(String, f64)> = Vec::new();
    let mut last = Instant::now();
    let mut record = |stage: &str, _fraction: f64| {
        let now = Instant::now();
        let spent = (now - last).as_secs_f64();
        last = now;
        match stages.last_mut() {
            Some((name, t)) if name == stage => *t += spent,
            _ => stages.push((stage.to_string(), spent)),
        }
        true
    };
    fit(stack, &w.settings, &mut record).unwrap_or_else(|e| panic!("{}: fit failed: {e}", w.name));
    let tail = last.elapsed().as_secs_f64();
    if let Some((_, t)) = stages.last_mut() {
        *t += tail;
    }
    stages
}

/// The floor: the stack's spectra by the fastest transform the fit has
/// (two real images per complex transform, `PackedPair`), one thread.
fn fft_stack(stack: &Stack) {
    for pair in stack.images().chunks(2) {
        std::hint::black_box(PackedPair::transform(&pair[0], pair.get(1), [0, 0]));
    }
}

fn measure(w: &Workload, reps: usize) -> WorkloadResult {
    eprintln!("{}: {} ...", w.name, w.description);
    let stack = w.stack();
    let half = Stack::new(
        stack.labels()[..stack.len() / 2].iter().cloned().zip(stack.images()[..stack.len() / 2].iter().cloned()).collect(),
    )
    .expect("half of a valid stack is valid");
    let stack_f32 = stack.len() * stack.height() * stack.width() * 4;

    // Peak memory of one fit (also warms up caches and the FFT planner).
    drop(half);
    let before = memory::current();
    memory::reset_peak();
    let warm = seconds(|| {
        std::hint::black_box(run_fit(&stack, w));
    });
    let peak = memory::peak();
    eprintln!("  first fit {warm:.3} s, peak heap {:.1} MB", peak as f64 / 1e6);
    let stages = staged_fit(&stack, w);
    let shown: Vec<String> = stages.iter().map(|(name, t)| format!("{name} {t:.3} s")).collect();
    eprintln!("  stages (time up to the next stage's first report): {}", shown.join(", "));
    let half = Stack::new(
        stack.labels()[..stack.len() / 2].iter().cloned().zip(stack.images()[..stack.len() / 2].iter().cloned()).collect(),
    )
    .expect("half of a valid stack is valid");

    let (mut fits, mut ffts, mut halves, mut singles) = (Vec::new(), Vec::new(), Vec::new(), Vec::new());
    for rep in 0..reps {
        ffts.push(seconds(|| fft_stack(&stack)));
        fits.push(seconds(|| {
            std::hint::black_box(run_fit(&stack, w));
        }));
        halves.push(seconds(|| {
            std::hint::black_box(run_fit(&half, w));
        }));
        orbitspan_core::fiber::set_thread_limit(1);
        singles.push(seconds(|| {
            std::hint::black_box(run_fit(&stack, w));
        }));
        orbitspan_core::fiber::set_thread_limit(0);
        eprintln!(
            "  rep {}: fft {:.3} s, fit {:.3} s, half-stack fit {:.3} s, fit on one thread {:.3} s",
            rep + 1,
            ffts[rep],
            fits[rep],
            halves[rep],
            singles[rep]
        );
    }
    let (fit_s, fft_s, half_s, single_s) = (median(fits), median(ffts), median(halves), median(singles));
    WorkloadResult {
        name: w.name.into(),
        description: w.description.clone(),
        images: stack.len(),
        fit_seconds: fit_s,
        one_thread_fit_seconds: single_s,
        fft_seconds: fft_s,
        half_stack_fit_seconds: half_s,
        stack_f32_bytes: stack_f32,
        peak_heap_bytes: peak,
        peak_heap_during_fit_bytes: peak - before,
        stages,
        fit_over_fft: fit_s / fft_s,
        one_thread_fit_over_fft: single_s / fft_s,
        doubling: fit_s / half_s,
        memory_over_stack_f32: peak as f64 / stack_f32 as f64,
        memory_during_fit_over_stack_f32: (peak - before) as f64 / stack_f32 as f64,
    }
}

fn measure_dense(w: &Workload, reps: usize) -> DenseResult {
    eprintln!("dense: {} ...", w.description);
    let stack = w.stack();
    let sym = Symmetry::new([stack.height(), stack.width()], [w.settings.cell_rows, w.settings.cell_cols], &w.settings.group)
        .expect("valid benchmark settings");
    let lmax = w.settings.generators;
    let (mut dense_t, mut fit_t) = (Vec::new(), Vec::new());
    let mut difference = 0.0f64;
    for _ in 0..reps {
        let mut dense_curve = Vec::new();
        dense_t.push(seconds(|| dense_curve = dense::dense_errors(&dense::group_permutations(&sym), stack.images(), lmax)));
        let mut fitted = None;
        fit_t.push(seconds(|| fitted = Some(run_fit(&stack, w))));
        let fitted = fitted.expect("fit ran");
        for (l, point) in fitted.report.error_curve.iter().enumerate() {
            difference = difference.max((point.error - dense_curve[l]).abs() / stack.energy());
        }
    }
    let (d, f) = (median(dense_t), median(fit_t));
    eprintln!("  dense {d:.4} s, fit {f:.4} s, curve difference {difference:.1e}");
    DenseResult { description: w.description.clone(), dense_seconds: d, fit_seconds: f, dense_over_fit: d / f, curve_difference: difference }
}

/// Native fits of the stacks decoded from the workload files, against the
/// browser's times for the same files.
fn measure_browser(dir: &std::path::Path, reps: usize, wanted: impl Fn(&str) -> bool) -> Result<Vec<BrowserResult>, String> {
    let timings = files::browser_timings(dir).ok_or_else(|| format!("no {} (the browser side did not run)", dir.join("browser.json").display()))?;
    let mut out = Vec::new();
    for t in timings.iter().filter(|t| wanted(&t.name)) {
        let w = workload::workloads(false)
            .into_iter()
            .chain(workload::workloads(true))
            .find(|w| w.name == t.name)
            .ok_or_else(|| format!("browser.json names an unknown workload {}", t.name))?;
        let stack = files::load(dir, &t.name)?;
        if stack.len() != t.images {
            return Err(format!("{}: the page had {} images, the files decode to {}", t.name, t.images, stack.len()));
        }
        // (Quick and full workloads of one name share their settings.)
        // Interleaved: all threads, then one thread, per repetition.
        let (mut all, mut one) = (Vec::new(), Vec::new());
        for _ in 0..reps.max(1) {
            let once = || {
                seconds(|| {
                    std::hint::black_box(fit(&stack, &w.settings, &mut Silent).expect("benchmark fit"));
                })
            };
            all.push(once());
            orbitspan_core::fiber::set_thread_limit(1);
            one.push(once());
            orbitspan_core::fiber::set_thread_limit(0);
        }
        let (native, native_one) = (median(all), median(one));
        let worker = median(t.worker_seconds.clone());
        let page = median(t.page_seconds.clone());
        let stack_f32 = stack.len() * stack.height() * stack.width() * 4;
        let spread = (t.workers > 1 && !t.spread_seconds.is_empty()).then(|| {
            let seconds = median(t.spread_seconds.clone());
            let begin = median(t.spread_timing.iter().map(|s| s.begin).collect());
            let finish = median(t.spread_timing.iter().map(|s| s.finish).collect());
            let work = median(t.spread_timing.iter().map(|s| s.tasks).collect());
            let handling = median(t.spread_timing.iter().map(|s| s.handling).collect());
            SpreadResult {
                workers: t.workers,
                seconds,
                speed_up: worker / seconds,
                begin_seconds: begin,
                finish_seconds: finish,
                task_work_seconds: work,
                handling_seconds: handling,
                expected_speed_up_8: worker / (begin + finish + handling + work / 8.0),
                memory_bytes: t.spread_memory_bytes,
                memory_over_stack_f32: t.spread_memory_bytes as f64 / stack_f32 as f64,
            }
        });
        eprintln!("browser {}: worker {worker:.3} s, page {page:.3} s, native {native:.3} s, native one thread {native_one:.3} s", t.name);
        out.push(BrowserResult {
            name: t.name.clone(),
            images: stack.len(),
            worker_seconds: worker,
            page_seconds: page,
            picture_seconds: (!t.picture_seconds.is_empty()).then(|| median(t.picture_seconds.clone())),
            next_picture_seconds: (!t.next_picture_seconds.is_empty()).then(|| median(t.next_picture_seconds.clone())),
            model_file_seconds: (!t.model_file_seconds.is_empty()).then(|| median(t.model_file_seconds.clone())),
            native_seconds: native,
            wasm_over_native: worker / native,
            native_one_thread_seconds: native_one,
            wasm_over_native_one_thread: worker / native_one,
            wasm_memory_bytes: t.wasm_memory_bytes,
            stack_f32_bytes: stack_f32,
            wasm_memory_over_stack_f32: t.wasm_memory_bytes as f64 / stack_f32 as f64,
            spread,
        });
    }
    Ok(out)
}

fn mb(bytes: usize) -> String {
    format!("{:.1} MB", bytes as f64 / 1e6)
}

fn table(r: &Results) -> String {
    let mut s = String::new();
    s.push_str(&format!(
        "Measured by `cargo xtask bench{}` ({} repetitions, medians, interleaved in one process; {} threads available; memory: {}).\n\n",
        if r.quick { " --quick" } else { "" },
        r.repetitions,
        r.threads_available,
        r.memory_method
    ));
    s.push_str("| workload | fit / FFT-only | the same, one thread each | time(2N) / time(N) | peak heap / stack f32 (during fit) | fit | FFT-only (one thread) | fit of N/2 | peak heap | stack f32 |\n");
    s.push_str("|---|---|---|---|---|---|---|---|---|---|\n");
    for w in &r.workloads {
        s.push_str(&format!(
            "| {}: {} | {:.2} | {:.2} | {:.2} | {:.2} ({:.2}) | {:.3} s | {:.3} s | {:.3} s | {} | {} |\n",
            w.name,
            w.description,
            w.fit_over_fft,
            w.one_thread_fit_over_fft,
            w.doubling,
            w.memory_over_stack_f32,
            w.memory_during_fit_over_stack_f32,
            w.fit_seconds,
            w.fft_seconds,
            w.half_stack_fit_seconds,
            mb(w.peak_heap_bytes),
            mb(w.stack_f32_bytes)
        ));
    }
    s.push_str("\n| dense method vs fit | dense / fit | dense | fit | max curve difference / energy |\n");
    s.push_str("|---|---|---|---|---|\n");
    for d in &r.dense {
        s.push_str(&format!(
            "| {} | {:.0} | {:.4} s | {:.4} s | {:.1e} |\n",
            d.description, d.dense_over_fit, d.dense_seconds, d.fit_seconds, d.curve_difference
        ));
    }
    if r.browser.is_empty() {
        s.push_str(&format!("\nwasm / native: not measured ({})\n", r.browser_note.as_deref().unwrap_or("no browser run")));
    } else {
        s.push_str("\n| in the browser (headless Chromium, one worker) | wasm / native (all threads) | wasm / native (one thread) | fit in the worker | request in the page | then: one image's pictures | then: the next image's | then: model file | native, same files | native, one thread | wasm memory / stack f32 | wasm memory |\n");
        s.push_str("|---|---|---|---|---|---|---|---|---|---|---|---|\n");
        let seconds = |v: Option<f64>| v.map_or("–".to_string(), |v| format!("{v:.3} s"));
        for b in &r.browser {
            s.push_str(&format!(
                "| {}: {} images | {:.2} | {:.2} | {:.3} s | {:.3} s | {} | {} | {} | {:.3} s | {:.3} s | {:.2} | {} |\n",
                b.name,
                b.images,
                b.wasm_over_native,
                b.wasm_over_native_one_thread,
                b.worker_seconds,
                b.page_seconds,
                seconds(b.picture_seconds),
                seconds(b.next_picture_seconds),
                seconds(b.model_file_seconds),
                b.native_seconds,
                b.native_one_thread_seconds,
                b.wasm_memory_over_stack_f32,
                mb(b.wasm_memory_bytes)
            ));
        }
        let spread: Vec<(&BrowserResult, &SpreadResult)> = r.browser.iter().filter_map(|b| Some((b, b.spread.as_ref()?))).collect();
        if spread.is_empty() {
            s.push_str("\nFit spread over workers: not measured (the browser reports one core).\n");
        } else {
            s.push_str("\n| spread over workers (same page) | workers | one worker / spread (speed-up) | expected speed-up on 8 cores (estimate) | fit, spread | before tasks | after tasks | tasks' work, all workers | handing out tasks | wasm memory, all workers / stack f32 |\n");
            s.push_str("|---|---|---|---|---|---|---|---|---|---|\n");
            for (b, p) in spread {
                s.push_str(&format!(
                    "| {} | {} | {:.2} | {:.2} | {:.3} s | {:.3} s | {:.3} s | {:.3} s | {:.3} s | {:.2} |\n",
                    b.name,
                    p.workers,
                    p.speed_up,
                    p.expected_speed_up_8,
                    p.seconds,
                    p.begin_seconds,
                    p.finish_seconds,
                    p.task_work_seconds,
                    p.handling_seconds,
                    p.memory_over_stack_f32
                ));
            }
            s.push_str("\nHanding out tasks: the time the fitting worker spent making the tasks' bytes and taking in their answers. Expected on 8 cores: one worker's time / (before + after + handing out + tasks' work / 8), assuming the tasks divide evenly over 8 cores and nothing else grows (an estimate, not a measurement).\n");
        }
    }
    s
}

fn main() {
    let args: Vec<String> = std::env::args().skip(1).collect();
    let options = match parse(&args) {
        Ok(o) => o,
        Err(e) => {
            eprintln!("orbitspan-bench: {e}");
            std::process::exit(2);
        }
    };
    let wanted = |name: &str| options.only.as_ref().map_or(true, |o| o.iter().any(|n| n == name));
    if let Some(dir) = &options.write_files {
        let chosen: Vec<_> = workload::workloads(options.quick).into_iter().filter(|w| wanted(w.name)).collect();
        if let Err(e) = files::write(dir, &chosen) {
            eprintln!("orbitspan-bench: {e}");
            std::process::exit(1);
        }
        return;
    }
    let (browser, browser_note) = match &options.browser {
        None => (Vec::new(), Some("run through `cargo xtask bench` for the browser side".to_string())),
        Some(dir) => match measure_browser(dir, options.reps, wanted) {
            Ok(b) => (b, None),
            Err(e) => {
                eprintln!("orbitspan-bench: browser comparison skipped: {e}");
                (Vec::new(), Some(e))
            }
        },
    };
    let mut workloads = Vec::new();
    for w in workload::workloads(options.quick) {
        if wanted(w.name) {
            workloads.push(measure(&w, options.reps));
        }
    }
    let dense: Vec<DenseResult> = match wanted("DENSE") {
        true => workload::dense_cases().iter().map(|w| measure_dense(w, options.reps)).collect(),
        false => Vec::new(),
    };
    let results = Results {
        quick: options.quick,
        repetitions: options.reps,
        threads_available: std::thread::available_parallelism().map_or(1, |n| n.get()),
        memory_method: "counting global allocator (heap bytes; the f64 stack itself included)",
        workloads,
        dense,
        browser,
        browser_note,
    };
    // A run that leaves workloads out or shrinks them writes beside the
    // whole table, not over it, and says so, so that its rows are not
    // taken for the whole table.
    let partial = partial_run(&options);
    let name = if partial.is_some() { "bench-partial" } else { "bench" };
    let md = match &partial {
        Some(what) => format!("Partial run ({what}): not the whole table.\n\n{}", table(&results)),
        None => table(&results),
    };
    print!("{md}");
    let dir = target_dir().join("bench");
    let (md_path, json_path) = (dir.join(format!("{name}.md")), dir.join(format!("{name}.json")));
    let written = std::fs::create_dir_all(&dir)
        .and_then(|_| std::fs::write(&md_path, &md))
        .and_then(|_| std::fs::write(&json_path, serde_json::to_string_pretty(&results).expect("results serialise")));
    match written {
        Ok(()) => eprintln!("wrote {} and {}", md_path.display(), json_path.display()),
        Err(e) => {
            eprintln!("orbitspan-bench: could not write {}: {e}", dir.display());
            std::process::exit(1);
        }
    }
}

/// What makes a run partial (`--only`, `--quick`, no `--browser`), or
/// `None` for the whole benchmark.
fn partial_run(options: &Options) -> Option<String> {
    let mut what = Vec::new();
    if let Some(only) = &options.only {
        what.push(format!("--only {}", only.join(",")));
    }
    if options.quick {
        what.push("--quick".to_string());
    }
    if options.browser.is_none() {
        what.push("no browser side".to_string());
    }
    (!what.is_empty()).then(|| what.join(", "))
}

/// `$CARGO_TARGET_DIR` or `<workspace>/target`.
fn target_dir() -> std::path::PathBuf {
    match std::env::var_os("CARGO_TARGET_DIR") {
        Some(d) => d.into(),
        None => std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("../../target"),
    }
}
