// The page's controller: keeps the state, talks to the worker, and asks each
// view to draw. All computation happens in the worker (worker.js).

import { WorkerClient } from './worker-client.js';
import { settingsFromFragment, settingsToFragment } from './settings-link.js';
import { downloadFile, readFile } from './download.js';
import { makeZip } from './zip.js';
import { csv } from './format.js';
import { createStackCard } from './views/stack-card.js';
import { createSymmetryCard } from './views/symmetry-card.js';
import { createFitCard } from './views/fit-card.js';
import { createResultsCard } from './views/results-card.js';
import { createViewer } from './views/viewer.js';
import { createCurve } from './views/curve.js';
import { createGallery } from './views/gallery.js';
import { createTopbar } from './views/topbar.js';

// ?workers=N sets how many workers share a fit (default: one per core).
const workersParam = Number(new URLSearchParams(location.search).get('workers'));
const client = new WorkerClient({ workers: workersParam >= 1 ? workersParam : undefined });

const state = {
  files: [], // [{ name, status: 'reading' | 'added' | 'failed', message, images }]
  images: [], // the stack: [{ label, height, width }]
  thumbnails: [], // one picture per image
  selected: 0,
  example: null, // { name, description } once the example stack is used
  settings: { group: 'p1', cell_rows: null, cell_cols: null, origin: [0, 0], generators: 4, band: null, lattice_coords: false, lattice: null, samples: null },
  settingsProblem: null, // a malformed input, said plainly
  check: null, // { problem, groups } for the current settings and image size
  canFit: false,
  fitBlocker: null, // why Fit cannot run now, or null
  busy: null, // null | 'files' | 'fit' | 'apply' | 'model' | 'measure' | 'survey'
  lattice: null, // the measured lattice { kind, a1, a2, lengths, angle, conventional, uncertainty, peaks }
  latticeKey: null, // the lattice choice it was measured for
  latticeProblem: null,
  survey: null, // { lattice, generators, groups: [survey rows] }
  latticeFit: null, // { lattice, grid, resampling_error, … } when the model is on a measured lattice
  progress: null, // { stage, fraction }
  fit: null, // { report, seconds } of the last finished fit
  model: null, // { info: { settings, height, width, generators }, source: 'fit' | file name }
  modelBytes: null,
  generators: null, // pictures of the model's generators
  chosen: null, // generators in use
  errors: null, // { rows: [{ file, energy, error, relative_error }], caption }
  fitStatus: null,
  fitStatusIsProblem: false,
  modelStatus: null,
  modelStatusIsProblem: false,
};

const cards = {
  stack: document.getElementById('card-stack'),
  symmetry: document.getElementById('card-symmetry'),
  fit: document.getElementById('card-fit'),
  results: document.getElementById('card-results'),
};

const stackCard = createStackCard({ onFiles: addFiles, onExample: useExample, onRemove: removeEntry, onClear: clearStack });
const symmetryCard = createSymmetryCard({ onChange: settingsChanged, onMeasure: measureLattice, onSurvey: runSurvey, onChooseGroup: chooseGroup });
const fitCard = createFitCard({ onChange: settingsChanged, onFit: runFit, onCancel: cancelFit });
const resultsCard = createResultsCard({ onSelect: select, onOpenModel: openModel, onApply: applyModel });
const viewer = createViewer({ onSelect: select });
const curve = createCurve({ onChoose: chooseGenerators });
const gallery = createGallery();
const topbar = createTopbar({ onSaveModel: saveModel, onExport: exportFiles, settingsLink: () => location.href });

function render() {
  const busy = state.busy !== null;
  for (const id of ['add-images', 'use-example', 'example-choice']) document.getElementById(id).disabled = busy;
  document.getElementById('curve-grid-note').hidden = !(state.latticeFit && state.model?.source === 'fit');
  // A newcomer's first step stands out until there are images.
  document.getElementById('use-example').classList.toggle('primary', state.images.length === 0);
  stackCard.render(state);
  symmetryCard.render(state);
  fitCard.render(state);
  resultsCard.render(state);
  viewer.render(state);
  curve.render(state.fit?.report.error_curve, state.model?.source === 'fit' ? state.chosen : null);
  gallery.render(state.generators, state.model?.source === 'fit' ? state.fit?.report.generators : null, state.chosen, state.model?.source);
  topbar.render(state);
}

const describeError = (error) => String(error?.message ?? error);

// ---- settings -------------------------------------------------------------

function readSettings() {
  const s = { ...symmetryCard.read(), ...fitCard.read() };
  state.settings = s;
  state.settingsProblem = settingsProblem(s);
  // A measurement or survey for another lattice choice no longer applies.
  if (state.latticeKey !== JSON.stringify(s.lattice)) {
    state.lattice = null;
    state.survey = null;
    state.latticeProblem = null;
  }
}

// The first malformed input, said plainly, or null.
function settingsProblem(s) {
  const wholeAtLeast = (value, least) => Number.isInteger(value) && value >= least;
  if (s.lattice) {
    if (s.lattice.mode === 'vectors' && ![...s.lattice.a1, ...s.lattice.a2].every(Number.isFinite)) return 'Give both lattice vectors as two numbers each (row, column), in pixels.';
    if (s.samples !== null && !wholeAtLeast(s.samples, 2)) return 'Samples per cell side must be a whole number, at least 2 (or empty for about one sample per pixel).';
  } else {
    if (!wholeAtLeast(s.cell_rows, 1) || !wholeAtLeast(s.cell_cols, 1)) return 'Give the unit cell as two whole numbers of pixels (height and width), at least 1.';
    if (!wholeAtLeast(s.origin[0], 0) || !wholeAtLeast(s.origin[1], 0)) return 'The origin is a pixel: two whole numbers, 0 or more.';
  }
  if (!wholeAtLeast(s.generators, 1)) return 'The number of generators L must be a whole number, at least 1.';
  if (s.band?.kind === 'frequencies' && !wholeAtLeast(s.band.value, 1)) return 'The band limit M is a whole number of frequencies, at least 1.';
  if (s.band?.kind === 'radius' && !(Number.isFinite(s.band.value) && s.band.value > 0)) return 'The band radius R must be a number above 0.';
  return null;
}

// Settings as the worker reads them: with a measured lattice the cell is not
// used, and an empty one is sent as 1 x 1.
function wireSettings(s) {
  return s.lattice ? { ...s, cell_rows: s.cell_rows || 1, cell_cols: s.cell_cols || 1 } : s;
}

let checkSequence = 0;
async function settingsChanged() {
  readSettings();
  if (!state.settingsProblem) history.replaceState(null, '', settingsToFragment(state.settings));
  const sequence = ++checkSequence;
  // Placeholders keep the request well formed while an input is being typed.
  const s = state.settings;
  const probe = state.settingsProblem
    ? { ...s, cell_rows: s.cell_rows > 0 ? s.cell_rows : 1, cell_cols: s.cell_cols > 0 ? s.cell_cols : 1, origin: [0, 0], generators: 1, band: null, lattice: null, samples: null }
    : wireSettings(s);
  render();
  try {
    const check = await client.request('check', { settings: probe });
    if (sequence !== checkSequence) return;
    state.check = check;
  } catch (error) {
    if (sequence !== checkSequence || error.name === 'Cancelled') return;
    state.check = null;
    state.settingsProblem = describeError(error);
  }
  const group = state.check?.groups.find((g) => g.name === state.settings.group);
  // Why Fit is not possible, said next to the Fit button.
  state.fitBlocker = !state.images.length ? 'Add images or use the example stack first.'
    : state.settingsProblem ?? state.check?.problem ?? (group && !group.ok ? `${group.name} cannot be used here: ${group.reason}` : null);
  state.canFit = !state.fitBlocker && Boolean(group?.ok);
  render();
}

function applySettings(settings) {
  symmetryCard.write(settings);
  fitCard.write(settings);
}

// ---- the stack ------------------------------------------------------------

async function stackChanged(images, from) {
  const before = state.images.length;
  state.images = images;
  // The lattice was measured on the old stack.
  state.lattice = null;
  state.latticeKey = null;
  state.survey = null;
  state.latticeProblem = null;
  if (state.selected >= images.length) state.selected = Math.max(0, images.length - 1);
  if (from !== null && images.length > from) {
    try {
      state.thumbnails = [...state.thumbnails.slice(0, from), ...(await client.request('thumbnails', { from }))];
    } catch (error) {
      if (error.name !== 'Cancelled') state.fitStatus = describeError(error);
    }
  }
  if (before === 0 && images.length > 0) {
    const s = symmetryCard.read();
    if (!s.cell_rows || !s.cell_cols) symmetryCard.write({ cell_rows: images[0].height, cell_cols: images[0].width });
  }
  await settingsChanged();
  await refreshPictures();
}

async function addFiles(fileList) {
  let tile;
  try {
    tile = stackCard.tile();
  } catch (error) {
    state.files.push(...fileList.map((f) => ({ name: f.name, status: 'failed', message: describeError(error) })));
    render();
    return;
  }
  const entries = fileList.map((f) => ({ name: f.name, status: 'reading', images: [] }));
  state.files.push(...entries);
  state.busy = 'files';
  render();
  const from = state.images.length;
  try {
    const files = await Promise.all(fileList.map(readFile));
    const result = await client.request('add-files', { files, tile });
    entries.forEach((entry, i) => {
      const added = result.added.find((a) => a.file === files[i].name && !a.used);
      const failed = result.failed.find((f) => f.file === files[i].name && !f.used);
      if (added) {
        added.used = true;
        entry.status = 'added';
        entry.images = added.images;
      } else if (failed) {
        failed.used = true;
        entry.status = 'failed';
        entry.message = failed.message;
      }
    });
    const kept = files.filter((_, i) => entries[i].status === 'added');
    if (kept.length) client.remember('add-files', { files: kept, tile });
    state.busy = null;
    await stackChanged(result.images, from);
  } catch (error) {
    for (const entry of entries) {
      if (entry.status === 'reading') Object.assign(entry, { status: 'failed', message: describeError(error) });
    }
    state.busy = null;
    render();
  }
}

async function useExample() {
  state.busy = 'files';
  render();
  const from = state.images.length;
  const which = document.getElementById('example-choice').value;
  try {
    const example = await client.request('add-example', { example: which });
    client.remember('add-example', { example: which });
    state.files.push({ name: `Example: ${example.name}`, status: 'added', images: example.added });
    state.example = { name: example.name, description: example.description };
    applySettings(example.settings);
    state.busy = null;
    await stackChanged(example.images, from);
    cards.symmetry.open = true;
    cards.fit.open = true;
  } catch (error) {
    state.busy = null;
    state.files.push({ name: 'Example stack', status: 'failed', message: describeError(error) });
    render();
  }
}

async function removeEntry(entry) {
  const index = state.files.indexOf(entry);
  if (entry.status !== 'added') {
    state.files.splice(index, 1);
    render();
    return;
  }
  const start = state.files.slice(0, index).filter((e) => e.status === 'added').reduce((n, e) => n + e.images.length, 0);
  let images = state.images;
  for (let i = start + entry.images.length - 1; i >= start; i--) {
    images = (await client.request('remove-image', { index: i })).images;
    client.remember('remove-image', { index: i });
  }
  state.files.splice(index, 1);
  state.thumbnails.splice(start, entry.images.length);
  if (entry.name.startsWith('Example: ')) state.example = null;
  await stackChanged(images, null);
}

async function clearStack() {
  const result = await client.request('clear');
  client.remember('clear');
  state.files = [];
  state.thumbnails = [];
  state.example = null;
  state.selected = 0;
  await stackChanged(result.images, null);
}

function select(index) {
  if (index < 0 || index >= state.images.length) return;
  state.selected = index;
  render();
  refreshPictures();
}

let pictureSequence = 0;
async function refreshPictures() {
  const sequence = ++pictureSequence;
  if (!state.images.length) {
    viewer.show(null);
    render();
    return;
  }
  try {
    const pictures = await client.request('pictures', { index: state.selected });
    if (sequence === pictureSequence) viewer.show(pictures);
  } catch (error) {
    if (error.name !== 'Cancelled' && sequence === pictureSequence) viewer.show({ problem: describeError(error) });
  }
  render();
}

// ---- fitting --------------------------------------------------------------

async function runFit() {
  readSettings();
  if (!state.canFit || state.settingsProblem) return;
  const settings = state.settings;
  state.busy = 'fit';
  state.progress = null;
  state.fitStatus = null;
  state.fitStatusIsProblem = false;
  render();
  try {
    const result = await client.request('fit', { settings: wireSettings(settings) }, (progress) => {
      state.progress = progress;
      fitCard.render(state);
    });
    state.fit = { report: result.report, seconds: result.seconds };
    state.model = { info: result.model, source: 'fit' };
    forgetModelBytes();
    state.generators = result.generators;
    state.chosen = result.model.generators;
    state.latticeFit = result.lattice;
    if (result.lattice) {
      state.lattice = result.lattice.lattice;
      state.latticeKey = JSON.stringify(settings.lattice);
    }
    state.errors = { rows: result.report.images, caption: errorsCaption(state.chosen) };
    state.modelStatus = result.lattice ? latticeModelNote(result.model) : null;
    // The model survives a worker restart as its record and generator
    // values (the arrays the pictures already hold; copied only if replayed).
    client.remember('restore-model', { record: result.record, generators: result.generators.map((g) => g.values) });
    if (result.lattice) client.remember('restore-lattice', { info: result.lattice });
    client.remember('restore-report', { report: result.report });
    state.busy = null;
    const workers = result.workers > 1 ? ` on ${result.workers} workers` : '';
    state.fitStatus = `Fitted ${state.images.length} image${state.images.length === 1 ? '' : 's'} in ${result.seconds.toFixed(2)} s${workers}.`;
    cards.stack.open = false;
    cards.symmetry.open = false;
    cards.results.open = true;
    await refreshPictures();
    fetchModelBytes();
  } catch (error) {
    if (error.name === 'Cancelled') return;
    state.busy = null;
    state.fitStatus = describeError(error);
    state.fitStatusIsProblem = true;
    render();
  }
}

async function cancelFit() {
  state.busy = null;
  state.progress = null;
  state.fitStatus = 'Stopping…';
  render();
  try {
    await client.cancel();
    state.fitStatus = 'Fit cancelled. Your images, settings and earlier results are kept.';
  } catch (error) {
    state.fitStatus = `The worker could not be restarted: ${describeError(error)}. Reload the page.`;
    state.fitStatusIsProblem = true;
  }
  await settingsChanged();
  fitCard.focusFit();
}

async function chooseGenerators(count) {
  if (state.busy !== null || state.model?.source !== 'fit' || count === state.chosen) return;
  state.busy = 'model';
  render();
  try {
    const result = await client.request('choose', { count });
    client.remember('choose', { count });
    state.model = { info: result.model, source: 'fit' };
    forgetModelBytes();
    state.chosen = count;
    const full = state.fit.report.error_curve.length;
    if (count === full) {
      state.errors = { rows: state.fit.report.images, caption: errorsCaption(count) };
    } else {
      const applied = await client.request('apply');
      state.errors = { rows: applied.errors, caption: errorsCaption(count) };
    }
    state.modelStatus = `Using the first ${count} of ${full} generators: pictures, saving and export follow.`;
    state.modelStatusIsProblem = false;
  } catch (error) {
    if (error.name === 'Cancelled') return;
    state.modelStatus = describeError(error);
    state.modelStatusIsProblem = true;
  }
  state.busy = null;
  await refreshPictures();
  if (state.model?.source === 'fit') fetchModelBytes();
}

// ---- models ---------------------------------------------------------------

// The current model's file (state.modelBytes) for a fit is asked for once its
// results are drawn, not with them: writing it checksums every byte, which on
// a large model takes about as long as making the generator pictures.
let modelBytesRequest = null;

function fetchModelBytes() {
  if (state.modelBytes) return Promise.resolve();
  if (modelBytesRequest) return modelBytesRequest;
  const request = client.request('model-bytes').then(
    (result) => {
      if (modelBytesRequest === request) state.modelBytes = result.bytes;
    },
    (error) => {
      if (error.name === 'Cancelled' || modelBytesRequest !== request) return;
      state.modelStatus = `The model file could not be made: ${describeError(error)}`;
      state.modelStatusIsProblem = true;
      render();
    },
  ).finally(() => {
    if (modelBytesRequest === request) modelBytesRequest = null;
  });
  modelBytesRequest = request;
  return request;
}

// The model changed: its file is made again when needed.
function forgetModelBytes() {
  state.modelBytes = null;
  modelBytesRequest = null;
}

async function openModel(file) {
  state.busy = 'model';
  render();
  try {
    const { name, bytes } = await readFile(file);
    const result = await client.request('open-model', { name, bytes });
    client.remember('open-model', { name, bytes });
    state.model = { info: result.model, source: name };
    state.latticeFit = null;
    forgetModelBytes();
    state.modelBytes = new Uint8Array(bytes);
    state.generators = result.generators;
    state.chosen = result.model.generators;
    state.errors = null;
    state.modelStatus = `Opened ${name}. Apply it to the stack to get the error per image.`;
    state.modelStatusIsProblem = false;
  } catch (error) {
    state.modelStatus = describeError(error);
    state.modelStatusIsProblem = true;
  }
  state.busy = null;
  await refreshPictures();
}

async function applyModel() {
  state.busy = 'apply';
  render();
  try {
    const result = await client.request('apply', {}, () => {});
    const from = state.model.source === 'fit' ? `this fit (L = ${state.chosen})` : state.model.source;
    state.errors = { rows: result.errors, caption: `Error per image under the model from ${from}` };
    state.modelStatus = `Applied to ${result.errors.length} image${result.errors.length === 1 ? '' : 's'} in ${result.seconds.toFixed(2)} s.`;
    state.modelStatusIsProblem = false;
    cards.results.open = true;
  } catch (error) {
    if (error.name === 'Cancelled') return;
    state.modelStatus = describeError(error);
    state.modelStatusIsProblem = true;
  }
  state.busy = null;
  render();
}

function modelFileName() {
  const s = state.model.info.settings;
  const grid = state.model.info.grid ? '-lattice-grid' : '';
  return `orbitspan-${s.group.replace(':', '-')}${grid}-L${state.model.info.generators}.orbitspan-model`;
}

function errorsCaption(count) {
  return state.latticeFit ? `Error per image on the lattice grid with L = ${count}` : `Error per image with L = ${count}`;
}

// What a model from a fit on a measured lattice is.
function latticeModelNote(model) {
  return `This model is on the lattice grid (${model.height} x ${model.width} samples), not on the pixels: `
    + 'it applies to images resampled onto that grid. Saved, it is labelled "lattice-grid".';
}

// ---- measured lattices ----------------------------------------------------

async function measureLattice() {
  readSettings();
  const s = state.settings;
  if (!s.lattice || state.settingsProblem) return;
  state.busy = 'measure';
  state.latticeProblem = null;
  render();
  try {
    state.lattice = await client.request('detect', { lattice: s.lattice });
    state.latticeKey = JSON.stringify(s.lattice);
  } catch (error) {
    if (error.name === 'Cancelled') return;
    state.lattice = null;
    state.latticeProblem = describeError(error);
  }
  state.busy = null;
  render();
}

async function runSurvey() {
  readSettings();
  const s = state.settings;
  if (!s.lattice || state.settingsProblem) return;
  state.busy = 'survey';
  state.progress = null;
  state.latticeProblem = null;
  render();
  try {
    const options = { lattice: s.lattice, samples: s.samples, generators: s.generators };
    const result = await client.request('survey', { options }, (progress) => {
      state.progress = progress;
      symmetryCard.render(state);
    });
    state.survey = result;
    state.lattice = result.lattice;
    state.latticeKey = JSON.stringify(s.lattice);
  } catch (error) {
    if (error.name === 'Cancelled') return;
    state.latticeProblem = describeError(error);
  }
  state.busy = null;
  state.progress = null;
  render();
}

function chooseGroup(name) {
  if (state.busy !== null) return;
  symmetryCard.write({ group: name });
  settingsChanged();
}

async function saveModel() {
  if (!state.modelBytes && state.model?.source === 'fit') await fetchModelBytes();
  if (state.modelBytes) downloadFile(modelFileName(), state.modelBytes);
}

// Returns a sentence saying what was downloaded.
async function exportFiles(parts) {
  const result = await client.request('export', { parts: { pictures: parts.pictures, arrays: parts.arrays, report: parts.report && Boolean(state.fit) } });
  const files = result.files;
  const encode = (text) => new TextEncoder().encode(text);
  if (parts.tables && state.fit) {
    const rows = state.fit.report.error_curve.map((p) => [p.generators, p.error, p.relative_error]);
    files.push({ name: 'error-curve.csv', bytes: encode(csv(['generators', 'error', 'relative_error'], rows)) });
  }
  if (parts.tables && state.errors) {
    const rows = state.errors.rows.map((r) => [r.file, r.energy, r.error, r.relative_error]);
    files.push({ name: 'image-errors.csv', bytes: encode(csv(['file', 'energy', 'error', 'relative_error'], rows)) });
  }
  if (!files.length) return 'Nothing to export yet.';
  if (files.length === 1) {
    downloadFile(files[0].name, files[0].bytes);
    return `Downloaded ${files[0].name}.`;
  }
  downloadFile('orbitspan-export.zip', makeZip(files), 'application/zip');
  return `Downloaded orbitspan-export.zip (${files.length} files).`;
}

// ---- start ----------------------------------------------------------------

function restoreFromLink() {
  const fromLink = settingsFromFragment(location.hash);
  if (Object.keys(fromLink).length) applySettings(fromLink);
}

async function drawLegend() {
  const canvas = document.getElementById('residual-legend');
  const picture = await client.request('legend', { width: canvas.width });
  canvas.getContext('2d').putImageData(new ImageData(picture.rgba, picture.width, picture.height), 0, 0);
}

window.addEventListener('hashchange', () => {
  restoreFromLink();
  settingsChanged();
});
restoreFromLink();
settingsChanged();
refreshPictures();
drawLegend();
