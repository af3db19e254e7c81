//! [`Session`]: the state the page's worker keeps between messages.

use crate::js_values::{error, from_js, picture, picture_with_values, set, to_js};
use crate::measured_lattice::{measured_of, LatticeFit, LatticeReport, Measured};
use crate::page_settings::{LatticeChoice, PageSettings};
use js_sys::{Array, Float64Array, Function, Object, Uint8Array};
use orbitspan_core::image_io::{self, DecodeLimits};
use orbitspan_core::lattice_detect::{self, DetectOptions, Detection};
use orbitspan_core::plane_group::{GroupSymbol, PlaneGroup, Setting};
use orbitspan_core::report::Report;
use orbitspan_core::stack::cut_tiles;
use orbitspan_core::survey::{self, MeasuredPlan};
use orbitspan_core::tasks::{FitTasks, TaskSolver};
use orbitspan_core::{demo, fit, npy, picture as pictures, Error, FitSettings, Image, Model, Stack};
use wasm_bindgen::prelude::*;

type JsResult<T> = Result<T, JsValue>;

/// What [`Session::model_record`] writes: a model without its generators.
#[derive(serde::Serialize, serde::Deserialize)]
struct ModelRecord {
    settings: FitSettings,
    height: usize,
    width: usize,
}

/// The stack, the last fit's report and the current model.
#[wasm_bindgen]
pub struct Session {
    images: Vec<(String, Image)>,
    report: Option<Report>,
    /// All generators of the last fit or the opened model file.
    model: Option<Model>,
    /// The model cut to its first `l` generators when the page chose `l`
    /// below the full count (the fit's spaces are nested: MATH.md §5).
    chosen: Option<Model>,
    /// The stack's detected lattice, kept until the stack changes.
    detection: Option<Detection>,
    /// Set when the model comes from a fit on a measured lattice: the model
    /// lives on this grid, not on the pixels.
    lattice_fit: Option<LatticeFit>,
    /// A fit spread over workers, between `fitBegin` and `fitFinish`.
    pending: Option<PendingFit>,
}

/// A fit whose orbit work runs as tasks (core `tasks`), and on a measured
/// lattice what turns its result into the measured fit.
struct PendingFit {
    tasks: FitTasks,
    measured: Option<(Measured, MeasuredPlan)>,
}

impl Default for Session {
    fn default() -> Self {
        Self::new()
    }
}

/// Adapts a JavaScript `progress(stage, fraction)` callback: a `false` return
/// value (or a throw) asks the core to stop.
fn progress_callback(callback: &Function) -> impl FnMut(&str, f64) -> bool + '_ {
    move |stage: &str, fraction: f64| match callback.call2(&JsValue::NULL, &JsValue::from_str(stage), &JsValue::from_f64(fraction)) {
        Ok(answer) => answer.as_bool() != Some(false),
        Err(_) => false,
    }
}

/// `{ label, height, width }` for each image.
fn image_list(items: &[(String, Image)]) -> Array {
    items
        .iter()
        .map(|(label, image)| {
            let o = Object::new();
            set(&o, "label", label.as_str());
            set(&o, "height", image.height as u32);
            set(&o, "width", image.width as u32);
            JsValue::from(o)
        })
        .collect()
}

/// The plane groups the page offers: every group in its standard setting and,
/// where it is a different group, with the axes exchanged.
fn offered_groups() -> Vec<PlaneGroup> {
    let mut out = Vec::new();
    for symbol in GroupSymbol::ALL {
        let standard = PlaneGroup::standard(symbol);
        out.push(standard);
        let exchanged = PlaneGroup { symbol, setting: Setting::Exchanged };
        let (a, b) = (standard.point_group(), exchanged.point_group());
        let same = a.coset_representatives().iter().all(|op| b.coset_representatives().contains(op));
        if !same {
            out.push(exchanged);
        }
    }
    out
}

#[wasm_bindgen]
impl Session {
    #[wasm_bindgen(constructor)]
    pub fn new() -> Session {
        Session {
            images: Vec::new(),
            report: None,
            model: None,
            chosen: None,
            detection: None,
            lattice_fit: None,
            pending: None,
        }
    }

    /// Decodes one file (PNG, JPEG, TIFF; pages of a multi-page TIFF become
    /// several images), optionally cut into `tile_rows x tile_cols` tiles
    /// (0 = no tiling), and adds its images to the stack. All or nothing: an
    /// image of another size than the stack's refuses the whole file. Returns
    /// `[{ label, height, width }]` of the added images.
    #[wasm_bindgen(js_name = addFile)]
    pub fn add_file(&mut self, name: &str, bytes: &[u8], tile_rows: usize, tile_cols: usize) -> JsResult<Array> {
        let decoded = image_io::decode(name, bytes, &DecodeLimits::default()).map_err(error)?;
        let items = if tile_rows == 0 && tile_cols == 0 {
            decoded
        } else {
            let mut tiles = Vec::new();
            for (label, image) in &decoded {
                tiles.extend(cut_tiles(label, image, tile_rows, tile_cols).map_err(error)?);
            }
            tiles
        };
        self.push_checked(items)
    }

    /// Adds an invented example stack: `"woven-cloth"` (core
    /// `demo::woven_cloth`, also when `which` is not given) or
    /// `"honeycomb-micrograph"` (core `demo::honeycomb_micrograph`). Returns
    /// `{ name, description, settings, images: [{ label, height, width }] }`
    /// with the example's suggested settings; for a stack whose lattice is
    /// not on the pixel grid they say to measure it (`lattice: { mode:
    /// "detect" }`, `samples` the suggested cell side), as `orbitspan demo`
    /// suggests.
    #[wasm_bindgen(js_name = addExample)]
    pub fn add_example(&mut self, which: Option<String>) -> JsResult<Object> {
        let example = match which.as_deref() {
            None | Some("woven-cloth") => demo::woven_cloth(),
            Some("honeycomb-micrograph") => demo::honeycomb_micrograph(),
            Some(other) => {
                return Err(error(Error::input(format!(
                    "unknown example '{other}': choose woven-cloth or honeycomb-micrograph"
                ))))
            }
        };
        let mut settings = PageSettings::from_core(&example.suggested);
        if example.lattice.is_some() {
            settings.lattice = Some(LatticeChoice::Detect);
            settings.samples = Some(example.suggested.cell_rows);
        }
        let images = self.push_checked(example.images)?;
        let out = Object::new();
        set(&out, "name", example.name);
        set(&out, "description", example.description);
        set(&out, "settings", to_js(&settings)?);
        set(&out, "images", images);
        Ok(out)
    }

    fn push_checked(&mut self, items: Vec<(String, Image)>) -> JsResult<Array> {
        for (label, image) in &items {
            // The core's stack check (size, finite pixels), against the stack's first image.
            let mut pair = Vec::with_capacity(2);
            if let Some((first_label, first)) = self.images.first() {
                pair.push((first_label.clone(), first.clone()));
            }
            pair.push((label.clone(), image.clone()));
            Stack::new(pair).map_err(error)?;
        }
        let added = image_list(&items);
        self.images.extend(items);
        self.detection = None;
        Ok(added)
    }

    /// Removes image `index` from the stack.
    #[wasm_bindgen(js_name = removeImage)]
    pub fn remove_image(&mut self, index: usize) -> JsResult<()> {
        if index >= self.images.len() {
            return Err(error(Error::input(format!("no image {index}: the stack has {}", self.images.len()))));
        }
        self.images.remove(index);
        self.detection = None;
        Ok(())
    }

    /// Empties the stack (the report and the model stay).
    #[wasm_bindgen(js_name = clearImages)]
    pub fn clear_images(&mut self) {
        self.images.clear();
        self.detection = None;
    }

    /// `[{ label, height, width }]` of the stack.
    pub fn images(&self) -> Array {
        image_list(&self.images)
    }

    /// Image `index` as a grey picture (percentile stretch).
    pub fn thumbnail(&self, index: usize) -> JsResult<Object> {
        let image = self.image(index)?;
        Ok(picture(image.height, image.width, &pictures::grey_rgba(image)))
    }

    fn image(&self, index: usize) -> JsResult<&Image> {
        self.images
            .get(index)
            .map(|(_, image)| image)
            .ok_or_else(|| error(Error::input(format!("no image {index}: the stack has {}", self.images.len()))))
    }

    /// The stack moved out of the session for one computation, no copy:
    /// [`Session::put_back`] must follow on every path (the images are
    /// checked first, so nothing is lost on an error here).
    fn take_stack(&mut self) -> Result<Stack, Error> {
        Stack::check(&self.images)?;
        Stack::new(std::mem::take(&mut self.images))
    }

    fn put_back(&mut self, stack: Stack) {
        self.images = stack.into_items();
    }

    /// Checks `settings` against the stack's image size (core `fit::validate`).
    /// Returns `{ problem, groups: [{ name, full, ok, reason }] }`: `problem`
    /// is a message about the cell, origin or generator count that holds for
    /// every group (or `null`); each offered group says whether it can be used
    /// with these settings and, if not, why. With an empty stack nothing can
    /// be checked: every group is offered and `problem` says so.
    ///
    /// With a measured lattice (`settings.lattice`), a group is usable when
    /// the lattice type allows it and its grid fits inside the images;
    /// `problem` says why the lattice cannot be measured, if so.
    #[wasm_bindgen(js_name = checkSettings)]
    pub fn check_settings(&mut self, settings: JsValue) -> JsResult<Object> {
        let page: PageSettings = from_js(settings, "settings")?;
        if let Some(choice) = page.lattice {
            return self.check_measured(choice, page.samples);
        }
        let base = FitSettings { group: PlaneGroup::standard(GroupSymbol::P1), ..page.to_core().map_err(error)? };
        let size = self.images.first().map(|(_, i)| (i.height, i.width));
        let problem = match size {
            None => Some("add images to check the settings against their size".to_string()),
            Some((h, w)) => fit::validate(h, w, &base).err().map(|e| e.to_string()),
        };
        let groups: Array = offered_groups()
            .into_iter()
            .map(|group| {
                let reason = match size {
                    Some((h, w)) if problem.is_none() => {
                        fit::validate(h, w, &FitSettings { group, ..base.clone() }).err().map(|e| e.to_string())
                    }
                    _ => None,
                };
                group_entry(group, reason)
            })
            .collect();
        Ok(check_result(problem, groups))
    }

    fn check_measured(&mut self, choice: LatticeChoice, samples: Option<usize>) -> JsResult<Object> {
        let Some((_, first)) = self.images.first() else {
            let groups = offered_groups().into_iter().map(|g| group_entry(g, None)).collect();
            return Ok(check_result(Some("add images to measure their lattice".to_string()), groups));
        };
        let (h, w) = (first.height, first.width);
        let measured = match self.measure(choice) {
            Ok(m) => m,
            Err(e) => {
                let groups = offered_groups()
                    .into_iter()
                    .map(|g| group_entry(g, Some("the lattice is not known yet".to_string())))
                    .collect();
                return Ok(check_result(Some(e.to_string()), groups));
            }
        };
        let groups = offered_groups()
            .into_iter()
            .map(|group| {
                let reason = match measured.cell_for(&group) {
                    Err(why) => Some(why.to_string()),
                    Ok(cell) => survey::grid_for(h, w, cell, &group, samples).err().map(|e| e.to_string()),
                };
                group_entry(group, reason)
            })
            .collect();
        Ok(check_result(None, groups))
    }

    /// The lattice of `choice`; a detection is kept until the stack changes.
    fn measure(&mut self, choice: LatticeChoice) -> Result<Measured, Error> {
        let stack = self.take_stack()?;
        let cached = &mut self.detection;
        let measured = measured_of(choice, &stack, |stack| {
            if let Some(d) = cached {
                return Ok(d.clone());
            }
            let d = lattice_detect::detect(stack, &DetectOptions::default())?;
            *cached = Some(d.clone());
            Ok(d)
        });
        self.put_back(stack);
        measured
    }

    /// Measures the stack's lattice (core `lattice_detect::detect`, default
    /// tolerances, as `orbitspan detect`). Returns `{ kind, a1, a2, lengths,
    /// angle, conventional, uncertainty: { lengths, angle }, peaks }`:
    /// vectors `(row, column)` in pixels, the reduced basis
    /// (`|a1| ≤ |a2|`, angle in [60°, 90°]), angle in degrees; "no lattice
    /// found" is a bad-input error.
    #[wasm_bindgen(js_name = detectLattice)]
    pub fn detect_lattice(&mut self) -> JsResult<JsValue> {
        self.lattice_of(serde_wasm_bindgen::to_value(&LatticeChoice::Detect).map_err(|e| error(Error::Internal(e.to_string())))?)
    }

    /// The lattice of `choice` (`{ mode: "detect" }` or `{ mode: "vectors",
    /// a1, a2 }`) as [`Session::detect_lattice`] describes it; typed vectors
    /// are reduced and classified, with `uncertainty` and `peaks` `null`.
    #[wasm_bindgen(js_name = latticeOf)]
    pub fn lattice_of(&mut self, choice: JsValue) -> JsResult<JsValue> {
        let choice: LatticeChoice = from_js(choice, "lattice")?;
        let measured = self.measure(choice).map_err(error)?;
        to_js(&measured.info())
    }

    /// The symmetry survey (core `survey::survey`, as `orbitspan survey`):
    /// `options = { lattice, samples, generators }`. Returns `{ lattice,
    /// generators, groups: [{ group, cell, deviation, cell_deviation,
    /// noise_level, consistent, order, centre, relative_error }] }`, ranked:
    /// consistent groups first, larger groups first among them, then by
    /// cell deviation. Calls `progress(stage, fraction)`.
    pub fn survey(&mut self, options: JsValue, progress: &Function) -> JsResult<JsValue> {
        #[derive(serde::Deserialize)]
        struct Options {
            lattice: LatticeChoice,
            #[serde(default)]
            samples: Option<usize>,
            generators: usize,
        }
        let options: Options = from_js(options, "survey options")?;
        let measured = self.measure(options.lattice).map_err(error)?;
        let stack = self.take_stack().map_err(error)?;
        let rows = survey::survey(
            &stack,
            measured.kind.lattice_type(),
            [measured.reduced.a1, measured.reduced.a2],
            [measured.conventional.a1, measured.conventional.a2],
            options.samples,
            options.generators,
            &mut progress_callback(progress),
        );
        self.put_back(stack);
        let rows = rows.map_err(error)?;
        let out = Object::new();
        set(&out, "lattice", to_js(&measured.info())?);
        set(&out, "generators", options.generators as u32);
        set(&out, "groups", to_js(&rows)?);
        Ok(out.into())
    }

    /// Fits the stack (core `fit::fit`), calling `progress(stage, fraction)`
    /// as it goes (return `false` to cancel). Keeps the model and returns the
    /// report (the `report.json` structure as a plain object).
    ///
    /// With `settings.lattice`, fits on the measured lattice as `orbitspan
    /// fit --lattice` does (core `survey::fit_measured`: resample onto the
    /// lattice, find the group's symmetry centre, fit on the grid): the
    /// report's curve and per-image errors are then on the lattice grid. A
    /// group the lattice type does not allow is refused with the reason.
    pub fn fit(&mut self, settings: JsValue, progress: &Function) -> JsResult<JsValue> {
        let (page, settings, measured) = self.fit_inputs(settings)?;
        let stack = self.take_stack().map_err(error)?;
        let outcome = (|| match &measured {
            None => Ok((fit::fit(&stack, &settings, &mut progress_callback(progress))?, None)),
            Some(measured) => {
                let cell = measured.cell_for(&settings.group)?;
                let m = survey::fit_measured(
                    &stack,
                    cell,
                    settings.group,
                    page.samples,
                    settings.generators,
                    settings.band,
                    None,
                    &mut progress_callback(progress),
                )?;
                let info = LatticeFit::new(measured, &m);
                Ok((m.fit, Some(info)))
            }
        })();
        self.put_back(stack);
        let (result, lattice_fit) = outcome.map_err(error)?;
        self.keep_fit(result, lattice_fit)
    }

    /// Starts the same fit as [`Session::fit`] with its orbit work cut into
    /// tasks for other workers (core `tasks`): validates, resamples onto a
    /// measured lattice if asked, transforms the images. Returns the number
    /// of tasks. Then `fitTask(k)` gives each task's bytes for a
    /// [`FitTaskSolver`], `fitAccept` takes the answers in any order, then
    /// (optionally) `fitGeneratorTask(l)` hands out the generator images
    /// the same way, and `fitFinish` ends the fit exactly as `fit` would
    /// (bit-identical).
    /// Starting another fit drops an unfinished one.
    #[wasm_bindgen(js_name = fitBegin)]
    pub fn fit_begin(&mut self, settings: JsValue, progress: &Function) -> JsResult<usize> {
        self.pending = None;
        let (page, settings, measured) = self.fit_inputs(settings)?;
        let stack = self.take_stack().map_err(error)?;
        let outcome = (|| match measured {
            None => Ok(PendingFit { tasks: FitTasks::new(&stack, &settings, &mut progress_callback(progress))?, measured: None }),
            Some(measured) => {
                let cell = measured.cell_for(&settings.group)?;
                let plan =
                    MeasuredPlan::new(&stack, cell, settings.group, page.samples, settings.generators, settings.band, None)?;
                let tasks = FitTasks::new(&plan.grid_stack, &plan.settings, &mut progress_callback(progress))?;
                Ok(PendingFit { tasks, measured: Some((measured, plan)) })
            }
        })();
        self.put_back(stack);
        let pending = outcome.map_err(error)?;
        let count = pending.tasks.len();
        self.pending = Some(pending);
        Ok(count)
    }

    /// The bytes of task `index` of the fit begun by `fitBegin`; each task
    /// is handed out once (its part of the transformed images is dropped).
    #[wasm_bindgen(js_name = fitTask)]
    pub fn fit_task(&mut self, index: usize) -> JsResult<Uint8Array> {
        // Written straight into the JavaScript array: no second copy of the
        // task's fibers in the wasm memory (which never shrinks).
        let mut out = Uint8Array::new_with_length(0);
        let mut at = 0u32;
        let tasks = &mut self.pending_fit()?.tasks;
        tasks
            .task_into(index, |total, piece| {
                if at == 0 {
                    out = Uint8Array::new_with_length(total as u32);
                }
                let end = at + piece.len() as u32;
                out.subarray(at, end).copy_from(piece);
                at = end;
            })
            .map_err(error)?;
        Ok(out)
    }

    /// The number of generator tasks of the fit begun by `fitBegin` (one per
    /// generator).
    #[wasm_bindgen(js_name = fitGeneratorTasks)]
    pub fn fit_generator_tasks(&mut self) -> JsResult<usize> {
        Ok(self.pending_fit()?.tasks.generators())
    }

    /// The bytes of generator `index`'s image task (core
    /// `FitTasks::generator_task`), once every fit task is answered: made
    /// by a [`FitTaskSolver`], its answer goes to `fitAccept`. Generators
    /// not handed out are made by `fitFinish`.
    #[wasm_bindgen(js_name = fitGeneratorTask)]
    pub fn fit_generator_task(&mut self, index: usize) -> JsResult<Uint8Array> {
        let bytes = self.pending_fit()?.tasks.generator_task(index).map_err(error)?;
        Ok(Uint8Array::from(bytes.as_slice()))
    }

    /// Takes one task's answer (from any worker, in any order): a fit
    /// task's or a generator task's.
    #[wasm_bindgen(js_name = fitAccept)]
    pub fn fit_accept(&mut self, answer: &[u8]) -> JsResult<()> {
        match self.pending.as_mut() {
            Some(p) => p.tasks.accept(answer).map_err(error),
            None => Err(error(Error::Internal("no fit has begun".into()))),
        }
    }

    /// Ends the fit begun by `fitBegin` once every task is answered; returns
    /// the report as `fit` does and keeps the fit as `fit` does.
    #[wasm_bindgen(js_name = fitFinish)]
    pub fn fit_finish(&mut self, progress: &Function) -> JsResult<JsValue> {
        let pending = self.pending.take().ok_or_else(|| error(Error::Internal("no fit has begun".into())))?;
        let result = pending.tasks.finish(&mut progress_callback(progress)).map_err(error)?;
        match pending.measured {
            None => self.keep_fit(result, None),
            Some((measured, plan)) => {
                let stack = self.take_stack().map_err(error)?;
                let m = plan.finish(&stack, result);
                self.put_back(stack);
                let info = LatticeFit::new(&measured, &m);
                self.keep_fit(m.fit, Some(info))
            }
        }
    }

    /// Drops a fit begun by `fitBegin` (a task failed or was cancelled).
    #[wasm_bindgen(js_name = fitAbort)]
    pub fn fit_abort(&mut self) {
        self.pending = None;
    }

    /// The page's settings, the core's, and the measured lattice when the
    /// settings ask for one (shared by `fit` and `fitBegin`).
    fn fit_inputs(&mut self, settings: JsValue) -> JsResult<(PageSettings, FitSettings, Option<Measured>)> {
        let page: PageSettings = from_js(settings, "settings")?;
        let settings = page.to_core().map_err(error)?;
        let measured = match page.lattice {
            Some(choice) => Some(self.measure(choice).map_err(error)?),
            None => None,
        };
        // The current model stays until the new fit is done (a failed fit
        // loses nothing), but not its spectra made for pictures.
        for model in self.model.iter_mut().chain(self.chosen.iter_mut()) {
            model.forget_spectra();
        }
        Ok((page, settings, measured))
    }

    fn pending_fit(&mut self) -> JsResult<&mut PendingFit> {
        self.pending.as_mut().ok_or_else(|| error(Error::Internal("no fit has begun".into())))
    }

    /// Keeps a finished fit as the session's report and model; returns the report.
    fn keep_fit(&mut self, result: fit::Fit, lattice_fit: Option<LatticeFit>) -> JsResult<JsValue> {
        let report = to_js(&result.report)?;
        self.report = Some(result.report);
        self.model = Some(result.model);
        self.chosen = None;
        self.lattice_fit = lattice_fit;
        Ok(report)
    }

    /// The measured lattice of the current model, or `null` when the model
    /// is on the pixel grid: `{ lattice, grid: { origin, cell, samples,
    /// cells }, resampling_error, image_deviation, cell_deviation,
    /// noise_level }`.
    #[wasm_bindgen(js_name = latticeFit)]
    pub fn lattice_fit(&self) -> JsResult<JsValue> {
        match &self.lattice_fit {
            Some(info) => to_js(info),
            None => Ok(JsValue::NULL),
        }
    }

    /// Takes back what [`Session::lattice_fit`] returned, after the page
    /// restarted its worker and reopened the model.
    #[wasm_bindgen(js_name = restoreLatticeFit)]
    pub fn restore_lattice_fit(&mut self, info: JsValue) -> JsResult<()> {
        self.lattice_fit = Some(from_js(info, "earlier lattice fit")?);
        Ok(())
    }

    /// `lattice.json` text as `orbitspan fit --lattice --out` writes it.
    #[wasm_bindgen(js_name = latticeJson)]
    pub fn lattice_json(&self) -> JsResult<String> {
        let info = self.lattice_fit.as_ref().ok_or_else(|| error(Error::input("the model is not on a measured lattice")))?;
        serde_json::to_string_pretty(&info.lattice_json()).map_err(|e| error(Error::Internal(format!("lattice: {e}"))))
    }

    /// The last fit's report as `report.json` text (as the command line writes it).
    #[wasm_bindgen(js_name = reportJson)]
    pub fn report_json(&self) -> JsResult<String> {
        let report = self.report.as_ref().ok_or_else(|| error(Error::input("no fit yet: fit the stack first")))?;
        serde_json::to_string_pretty(report).map_err(|e| error(Error::Internal(format!("report: {e}"))))
    }

    /// Takes back the report of an earlier fit (the object [`Session::fit`]
    /// returned) after the page restarted its worker; the model comes back
    /// with [`Session::open_model`].
    #[wasm_bindgen(js_name = restoreReport)]
    pub fn restore_report(&mut self, report: JsValue) -> JsResult<()> {
        self.report = Some(from_js(report, "earlier report")?);
        Ok(())
    }

    fn full_model(&self) -> JsResult<&Model> {
        self.model.as_ref().ok_or_else(|| error(Error::input("no model yet: fit the stack or open a model file")))
    }

    fn current_model(&self) -> JsResult<&Model> {
        match &self.chosen {
            Some(model) => Ok(model),
            None => self.full_model(),
        }
    }

    /// Uses only the first `count` generators of the model from now on
    /// (pictures, saving, applying). Returns the new `{ settings, height, width, generators }`.
    #[wasm_bindgen(js_name = chooseGenerators)]
    pub fn choose_generators(&mut self, count: usize) -> JsResult<JsValue> {
        let full = self.full_model()?;
        let all = full.generators().len();
        if count == 0 || count > all {
            return Err(error(Error::input(format!("choose between 1 and {all} generators, not {count}"))));
        }
        self.chosen = if count == all {
            None
        } else {
            let settings = FitSettings { generators: count, ..full.settings().clone() };
            Some(Model::new(settings, full.height(), full.width(), full.generators()[..count].to_vec()).map_err(error)?)
        };
        self.model_info()
    }

    /// `{ settings, height, width, generators, grid }` of the current model;
    /// `grid` is `null` for a model on the pixel grid, else `{ samples,
    /// cells }` of the lattice grid it was fitted on (its `height` and
    /// `width` are then that grid's size in samples).
    #[wasm_bindgen(js_name = modelInfo)]
    pub fn model_info(&self) -> JsResult<JsValue> {
        let model = self.current_model()?;
        let out = Object::new();
        set(&out, "settings", to_js(&PageSettings::from_core(model.settings()))?);
        set(&out, "height", model.height() as u32);
        set(&out, "width", model.width() as u32);
        set(&out, "generators", model.generators().len() as u32);
        let grid = match &self.lattice_fit {
            Some(info) => to_js(&serde_json::json!({ "samples": info.grid.samples, "cells": info.grid.cells }))?,
            None => JsValue::NULL,
        };
        set(&out, "grid", grid);
        Ok(out.into())
    }

    /// The data the current model acts on for image `index` (the image, or
    /// after a measured fit the image resampled onto the model's grid) and
    /// its projection.
    fn fitted(&self, image: &Image) -> JsResult<(Image, Image)> {
        let model = self.current_model()?;
        let data = match &self.lattice_fit {
            Some(info) => info.grid.to_lattice(image),
            None => image.clone(),
        };
        let fitted = model.project(&data).map_err(error)?;
        Ok((data, fitted))
    }

    /// Pictures of image `index`: `{ original, fitted, residual, problem }`;
    /// each picture is `{ height, width, rgba, values }`. `fitted` and
    /// `residual` (residual = original − fitted, on a diverging scale) are
    /// `null` without a model or when the model does not fit the image, and
    /// `problem` then says why. After a fit on a measured lattice, fitted
    /// and residual are computed on the lattice grid and mapped back to the
    /// pixels (core `LatticeGrid::to_pixels`); outside the resampled area
    /// the residual is 0, the fitted picture shows the mean of the fitted
    /// area and their `values` are NaN.
    pub fn pictures(&self, index: usize) -> JsResult<Object> {
        let image = self.image(index)?;
        let out = Object::new();
        set(&out, "original", picture_with_values(image, &pictures::grey_rgba(image)));
        let projected = self.fitted(image).map(|(data, fitted)| {
            let residual = residual_of(&data, &fitted);
            match &self.lattice_fit {
                None => (fitted.clone(), fitted, residual.clone(), residual),
                Some(info) => {
                    let (h, w) = (image.height, image.width);
                    let (fitted, mask) = info.grid.to_pixels(&fitted, h, w);
                    let (residual, _) = info.grid.to_pixels(&residual, h, w);
                    let inside = mask.iter().filter(|&&m| m).count().max(1);
                    let mean = fitted.pixels.iter().zip(&mask).filter(|(_, &m)| m).map(|(v, _)| v).sum::<f64>() / inside as f64;
                    let outside = |img: &Image, fill: f64| {
                        Image::new(h, w, img.pixels.iter().zip(&mask).map(|(&v, &m)| if m { v } else { fill }).collect())
                    };
                    (outside(&fitted, mean), outside(&fitted, f64::NAN), outside(&residual, 0.0), outside(&residual, f64::NAN))
                }
            }
        });
        match projected {
            Ok((fitted, fitted_values, residual, residual_values)) => {
                set(&out, "fitted", picture_with_values(&fitted_values, &pictures::grey_rgba(&fitted)));
                set(&out, "residual", picture_with_values(&residual_values, &pictures::diverging_rgba(&residual)));
                set(&out, "problem", JsValue::NULL);
            }
            Err(problem) => {
                set(&out, "fitted", JsValue::NULL);
                set(&out, "residual", JsValue::NULL);
                set(&out, "problem", js_sys::Reflect::get(&problem, &"message".into()).unwrap_or(JsValue::NULL));
            }
        }
        Ok(out)
    }

    /// Pictures of all generators of the full model: `[{ height, width, rgba, values }]`.
    #[wasm_bindgen(js_name = generatorPictures)]
    pub fn generator_pictures(&self) -> JsResult<Array> {
        let model = self.full_model()?;
        Ok(model
            .generators()
            .iter()
            .map(|g| JsValue::from(picture_with_values(g, &pictures::grey_rgba(g))))
            .collect())
    }

    /// The current model in the model file format (`.orbitspan-model`).
    #[wasm_bindgen(js_name = modelBytes)]
    pub fn model_bytes(&self) -> JsResult<Uint8Array> {
        Ok(Uint8Array::from(self.current_model()?.to_bytes().as_slice()))
    }

    /// The full model's settings and size as JSON text, opaque to the page.
    /// With the generator values of [`Session::generator_pictures`] it is
    /// all [`Session::restore_model`] needs to make the model again, so the
    /// page keeps a fit's model across a worker restart without the model
    /// file (whose checksum, one pass over every byte, is what makes writing
    /// it slow); the file is made only when it is asked for.
    #[wasm_bindgen(js_name = modelRecord)]
    pub fn model_record(&self) -> JsResult<String> {
        let model = self.full_model()?;
        let record = ModelRecord { settings: model.settings().clone(), height: model.height(), width: model.width() };
        serde_json::to_string(&record).map_err(|e| error(Error::Internal(format!("model record: {e}"))))
    }

    /// Makes the model of a [`Session::model_record`] and its generators'
    /// values (`Float64Array`s, row-major, as in the generator pictures)
    /// the current model, as opening its file would: the last fit's report
    /// is kept, a chosen count and a measured lattice are not. Returns the
    /// model's `{ settings, height, width, generators, grid }`.
    #[wasm_bindgen(js_name = restoreModel)]
    pub fn restore_model(&mut self, record: &str, generators: Array) -> JsResult<JsValue> {
        let bad = |what: String| error(Error::input(format!("restoring the model: {what}")));
        let record: ModelRecord = serde_json::from_str(record).map_err(|e| bad(format!("its record is not valid ({e})")))?;
        let (height, width) = (record.height, record.width);
        let images = generators
            .iter()
            .enumerate()
            .map(|(i, value)| {
                let values = value.dyn_into::<Float64Array>().map_err(|_| bad(format!("generator {} is not a Float64Array", i + 1)))?;
                if values.length() as usize != height * width {
                    return Err(bad(format!("generator {} has {} values, not {height}x{width}", i + 1, values.length())));
                }
                Ok(Image { height, width, pixels: values.to_vec() })
            })
            .collect::<JsResult<Vec<Image>>>()?;
        let model = Model::new(record.settings, height, width, images).map_err(error)?;
        self.use_model(model)
    }

    /// Makes `model` the current model, as opening a model file does: the
    /// last fit's report is kept, a chosen count and a measured lattice are
    /// not. Returns the model's info.
    fn use_model(&mut self, model: Model) -> JsResult<JsValue> {
        self.model = Some(model);
        self.chosen = None;
        self.lattice_fit = None;
        self.model_info()
    }

    /// Opens a model file; it becomes the current model (the last fit's
    /// report is kept). Returns `{ settings, height, width, generators }`.
    #[wasm_bindgen(js_name = openModel)]
    pub fn open_model(&mut self, name: &str, bytes: &[u8]) -> JsResult<JsValue> {
        let model = Model::from_bytes(name, bytes).map_err(error)?;
        self.use_model(model)
    }

    /// Applies the current model to the stack: per-image
    /// `[{ file, energy, error, relative_error }]` (core `Model::evaluate`).
    /// A model from a fit on a measured lattice is applied to the images
    /// resampled onto its grid (errors on the grid). A model file does not
    /// hold a grid: applied to images of another size, the message says that
    /// a lattice-grid model needs images on that grid.
    #[wasm_bindgen(js_name = applyModel)]
    pub fn apply_model(&mut self, progress: &Function) -> JsResult<JsValue> {
        match &self.lattice_fit {
            Some(info) => {
                let stack = Stack::new(self.images.iter().map(|(l, i)| (l.clone(), info.grid.to_lattice(i))).collect())
                    .map_err(error)?;
                self.apply_to(&stack, progress)
            }
            None => {
                let stack = self.take_stack().map_err(error)?;
                let errors = self.apply_to(&stack, progress);
                self.put_back(stack);
                errors
            }
        }
    }

    fn apply_to(&self, stack: &Stack, progress: &Function) -> JsResult<JsValue> {
        let model = self.current_model()?;
        let grid_model = model.settings().lattice_coords;
        let differs = stack.height() != model.height() || stack.width() != model.width();
        if self.lattice_fit.is_none() && grid_model && differs {
            return Err(error(Error::input(format!(
                "the model is on a lattice grid of {} x {} samples and the images are {} x {} pixels; \
                 a model fitted on a measured lattice applies only to images resampled onto its grid: \
                 fit this stack with the measured lattice instead",
                model.height(),
                model.width(),
                stack.height(),
                stack.width()
            ))));
        }
        let errors = model.evaluate(stack, &mut progress_callback(progress)).map_err(error)?;
        to_js(&errors)
    }

    /// NumPy `.npy` bytes (`<f8`, C order) of `generators` (shape `(L, H, W)`
    /// of the current model), or of the stack's `approximations` or
    /// `residuals` under the current model (shape `(N, H, W)`).
    pub fn npy(&self, kind: &str) -> JsResult<Uint8Array> {
        let model = self.current_model()?;
        let images: Vec<Image> = match kind {
            "generators" => model.generators().to_vec(),
            "approximations" | "residuals" => {
                let mut out = Vec::with_capacity(self.images.len());
                for (_, image) in &self.images {
                    let (data, fitted) = self.fitted(image)?;
                    out.push(if kind == "residuals" { residual_of(&data, &fitted) } else { fitted });
                }
                out
            }
            other => return Err(error(Error::input(format!("unknown array '{other}'")))),
        };
        let (h, w) = (model.height(), model.width());
        let data: Vec<f64> = images.iter().flat_map(|i| i.pixels.iter().copied()).collect();
        Ok(Uint8Array::from(npy::encode_f64(&[images.len(), h, w], &data).as_slice()))
    }

    /// PNG bytes of one picture: `original`, `fitted` or `residual` of image
    /// `index`, or `generator` number `index` (0-based) of the current model.
    /// After a fit on a measured lattice `fitted` and `residual` are on the
    /// lattice grid (as the command line writes them) and `residual-pixels`
    /// is the residual mapped back to the pixels (0 outside the resampled area).
    pub fn png(&self, kind: &str, index: usize) -> JsResult<Uint8Array> {
        let (image, rgba) = match kind {
            "original" => {
                let image = self.image(index)?.clone();
                let rgba = pictures::grey_rgba(&image);
                (image, rgba)
            }
            "fitted" | "residual" => {
                let (data, fitted) = self.fitted(self.image(index)?)?;
                if kind == "fitted" {
                    let rgba = pictures::grey_rgba(&fitted);
                    (fitted, rgba)
                } else {
                    let residual = residual_of(&data, &fitted);
                    let rgba = pictures::diverging_rgba(&residual);
                    (residual, rgba)
                }
            }
            "residual-pixels" => {
                let image = self.image(index)?;
                let info = self.lattice_fit.as_ref().ok_or_else(|| error(Error::input("the model is not on a measured lattice")))?;
                let (data, fitted) = self.fitted(image)?;
                let (back, mask) = info.grid.to_pixels(&residual_of(&data, &fitted), image.height, image.width);
                let masked = Image::new(
                    back.height,
                    back.width,
                    back.pixels.iter().zip(&mask).map(|(&v, &m)| if m { v } else { 0.0 }).collect(),
                );
                let rgba = pictures::diverging_rgba(&masked);
                (masked, rgba)
            }
            "generator" => {
                let g = self.current_model()?.generators().get(index).cloned().ok_or_else(|| {
                    error(Error::input(format!("no generator {}: the model has fewer", index + 1)))
                })?;
                let rgba = pictures::grey_rgba(&g);
                (g, rgba)
            }
            other => return Err(error(Error::input(format!("unknown picture '{other}'")))),
        };
        Ok(Uint8Array::from(pictures::png_rgba(image.height, image.width, &rgba).as_slice()))
    }
}

/// The residual colour scale as a picture one pixel high: core
/// `diverging_rgba` of values running evenly from −1 (left) to 1 (right).
#[wasm_bindgen(js_name = residualLegend)]
pub fn residual_legend(width: usize) -> Object {
    let width = width.max(2);
    let ramp: Vec<f64> = (0..width).map(|i| -1.0 + 2.0 * i as f64 / (width - 1) as f64).collect();
    picture(1, width, &pictures::diverging_rgba(&Image::new(1, width, ramp)))
}

/// `{ name, full, ok, reason }` of one offered group.
fn group_entry(group: PlaneGroup, reason: Option<String>) -> JsValue {
    let o = Object::new();
    set(&o, "name", group.name());
    let full = match group.setting {
        Setting::Standard => group.symbol.full().to_string(),
        Setting::Exchanged => format!("{}, axes exchanged", group.symbol.full()),
    };
    set(&o, "full", full);
    set(&o, "ok", reason.is_none());
    set(&o, "reason", reason.map_or(JsValue::NULL, |r| JsValue::from_str(&r)));
    o.into()
}

/// `{ problem, groups }` of a settings check.
fn check_result(problem: Option<String>, groups: Array) -> Object {
    let out = Object::new();
    set(&out, "problem", problem.map_or(JsValue::NULL, |p| JsValue::from_str(&p)));
    set(&out, "groups", groups);
    out
}

/// `f − P_V f`, pixel by pixel.
fn residual_of(image: &Image, fitted: &Image) -> Image {
    Image::new(image.height, image.width, image.pixels.iter().zip(&fitted.pixels).map(|(f, p)| f - p).collect())
}

/// Solves fit tasks and generator tasks in a helper worker (core
/// `tasks::TaskSolver`): the worker needs no session and no images, only
/// the task's bytes.
#[wasm_bindgen]
#[derive(Default)]
pub struct FitTaskSolver {
    solver: TaskSolver,
}

#[wasm_bindgen]
impl FitTaskSolver {
    #[wasm_bindgen(constructor)]
    pub fn new() -> FitTaskSolver {
        FitTaskSolver::default()
    }

    /// The answer to one task's bytes (for `Session.fitAccept`).
    pub fn solve(&mut self, task: &[u8]) -> JsResult<Uint8Array> {
        let answer = self.solver.solve(task).map_err(error)?;
        Ok(Uint8Array::from(answer.as_slice()))
    }
}
