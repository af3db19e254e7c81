// The worker: runs the wasm core (crates/orbitspan-wasm) off the page's thread.
//
// Protocol: one set of messages.
//   page -> worker  { id, op, ...arguments }
//   worker -> page  { id, progress: { stage, fraction } }     zero or more, for 'fit', 'survey' and 'apply'
//                   { id, result }                           then exactly one of these two
//                   { id, error: { name, message } }         name: BadInput | Cancelled | InternalError
// Requests are handled one at a time, in the order sent. Typed arrays in a
// result are transferred, not copied. Pictures are { height, width, rgba:
// Uint8ClampedArray, values?: Float64Array }. Settings are the page's form:
// { group: 'p4m', cell_rows, cell_cols, origin: [row, col], generators,
//   band: null | { kind: 'frequencies' | 'radius', value }, lattice_coords,
//   lattice: null | { mode: 'detect' } | { mode: 'vectors', a1: [row, col], a2: [row, col] },
//   samples: null | S }.
// With a lattice (vectors in pixels), a fit resamples the images onto a grid
// along the lattice with S samples per cell side (null: about one per pixel)
// and fits there, as `orbitspan fit --lattice`; cell, origin and
// lattice_coords are then not used. Lattice info is { kind, a1, a2, lengths,
// angle, conventional, uncertainty: null | { lengths, angle }, peaks }: the
// reduced basis in pixels, lengths in pixels, angles in degrees.
//
//   op             arguments                    result
//   add-files      files: [{ name, bytes }],    { added: [{ file, images }], failed: [{ file, message }], images }
//                  tile: { rows, cols } | null
//   add-example    example: 'woven-cloth' |     { name, description, settings, added, images }
//                  'honeycomb-micrograph'
//   remove-image   index                        { images }
//   clear          -                            { images }
//   thumbnails     from                         [picture] of images from..end
//   check          settings                     { problem, groups: [{ name, full, ok, reason }] }
//   detect         lattice                      lattice info (measured, or typed vectors reduced)
//   survey         options: { lattice,          { lattice, generators, groups: [{ group, cell, order,
//                  samples, generators }          cell_deviation, noise_level, consistent, deviation,
//                                                 centre, relative_error }] }, ranked (best first)
//   fit            settings                     { report, generators: [picture], model, modelBytes, seconds,
//                                                 lattice: null | { lattice, grid, resampling_error,
//                                                 image_deviation, cell_deviation, noise_level } }
//   restore-report report                       null (the report of an earlier fit, after a restart)
//   restore-lattice info                        null (the lattice of an earlier fit's model, after a restart)
//   choose         count                        { model, modelBytes }
//   pictures       index                        { original, fitted, residual, problem }
//   open-model     name, bytes                  { model, generators: [picture] }
//   apply          -                            { errors: [{ file, energy, error, relative_error }], seconds }
//   export         parts: { pictures, arrays,   { files: [{ name, bytes }] }
//                  report }
//   legend         width                        picture of the residual colour scale, −1 … 1
//   memory         -                            { bytes } the wasm memory's size (it only grows: the peak so far)
// where images = [{ label, height, width }] is the whole stack after the
// change and model = { settings, height, width, generators, grid }; grid is
// null, or { samples, cells } when the model is on a measured lattice's grid
// (then the report's errors are on that grid, pictures are mapped back to the
// pixels, and an export also holds lattice.json and residual-pixels-NNN.png).
//
// Cancel: the page terminates this worker and starts a new one, then sends
// the requests that rebuild the stack and the model (web/worker-client.js).

import init, { Session, residualLegend } from './pkg/orbitspan_wasm.js';

let wasm = null;
const ready = startWasm();
let session = null;
let queue = Promise.resolve();

self.onmessage = (event) => {
  queue = queue.then(() => handle(event.data));
};

async function startWasm() {
  // The self-contained page passes the wasm as base64 in front of this source.
  const inline = globalThis.orbitspanWasmBase64;
  if (inline) {
    const bytes = Uint8Array.from(atob(inline), (c) => c.charCodeAt(0));
    wasm = await init({ module_or_path: bytes });
  } else {
    wasm = await init();
  }
  session = new Session();
}

async function handle(message) {
  const { id, op } = message;
  try {
    await ready;
    const result = run(op, message, progressReporter(id));
    self.postMessage({ id, result }, transferables(result));
  } catch (error) {
    self.postMessage({ id, error: { name: error?.name ?? 'InternalError', message: String(error?.message ?? error) } });
  }
}

// A progress callback that posts at most every 50 ms (and at every new stage).
function progressReporter(id) {
  let last = 0;
  let lastStage = '';
  return (stage, fraction) => {
    const now = performance.now();
    if (stage !== lastStage || now - last > 50) {
      self.postMessage({ id, progress: { stage, fraction } });
      last = now;
      lastStage = stage;
    }
    return true;
  };
}

function run(op, m, progress) {
  switch (op) {
    case 'add-files': {
      const added = [];
      const failed = [];
      for (const file of m.files) {
        try {
          const images = session.addFile(file.name, new Uint8Array(file.bytes), m.tile?.rows ?? 0, m.tile?.cols ?? 0);
          added.push({ file: file.name, images });
        } catch (error) {
          if (error?.name === 'InternalError') throw error;
          failed.push({ file: file.name, message: String(error?.message ?? error) });
        }
      }
      return { added, failed, images: session.images() };
    }
    case 'add-example': {
      const example = session.addExample(m.example);
      return { ...example, added: example.images, images: session.images() };
    }
    case 'remove-image':
      session.removeImage(m.index);
      return { images: session.images() };
    case 'clear':
      session.clearImages();
      return { images: session.images() };
    case 'thumbnails': {
      const count = session.images().length;
      const out = [];
      for (let i = m.from; i < count; i++) out.push(session.thumbnail(i));
      return out;
    }
    case 'check':
      return session.checkSettings(m.settings);
    case 'detect':
      return session.latticeOf(m.lattice ?? { mode: 'detect' });
    case 'survey':
      return session.survey(m.options, progress);
    case 'fit': {
      const start = performance.now();
      const report = session.fit(m.settings, progress);
      const seconds = (performance.now() - start) / 1000;
      return {
        report, seconds,
        generators: session.generatorPictures(), model: session.modelInfo(), modelBytes: session.modelBytes(),
        lattice: session.latticeFit(),
      };
    }
    case 'restore-report':
      session.restoreReport(m.report);
      return null;
    case 'restore-lattice':
      session.restoreLatticeFit(m.info);
      return null;
    case 'choose':
      return { model: session.chooseGenerators(m.count), modelBytes: session.modelBytes() };
    case 'pictures':
      return session.pictures(m.index);
    case 'open-model': {
      const model = session.openModel(m.name, new Uint8Array(m.bytes));
      return { model, generators: session.generatorPictures() };
    }
    case 'apply': {
      const start = performance.now();
      const errors = session.applyModel(progress);
      return { errors, seconds: (performance.now() - start) / 1000 };
    }
    case 'export':
      return { files: exportFiles(m.parts) };
    case 'memory':
      return { bytes: wasm.memory.buffer.byteLength };
    case 'legend':
      return residualLegend(m.width);
    default:
      throw new Error(`unknown request '${op}'`);
  }
}

// The files of an export, named as the command line names them.
function exportFiles(parts) {
  const files = [];
  const count = session.images().length;
  const generators = session.modelInfo().generators;
  const number = (i, width) => String(i + 1).padStart(width, '0');
  const onLattice = session.latticeFit() !== null;
  if (parts.report) {
    files.push({ name: 'report.json', bytes: new TextEncoder().encode(session.reportJson() + '\n') });
  }
  if (onLattice && (parts.report || parts.arrays || parts.pictures)) {
    files.push({ name: 'lattice.json', bytes: new TextEncoder().encode(session.latticeJson() + '\n') });
  }
  if (parts.arrays) {
    files.push({ name: 'generators.npy', bytes: session.npy('generators') });
    if (count > 0) {
      files.push({ name: 'approximations.npy', bytes: session.npy('approximations') });
      files.push({ name: 'residuals.npy', bytes: session.npy('residuals') });
    }
  }
  if (parts.pictures) {
    for (let l = 0; l < generators; l++) files.push({ name: `generator-${number(l, 2)}.png`, bytes: session.png('generator', l) });
    for (let i = 0; i < count; i++) {
      files.push({ name: `original-${number(i, 3)}.png`, bytes: session.png('original', i) });
      files.push({ name: `fitted-${number(i, 3)}.png`, bytes: session.png('fitted', i) });
      files.push({ name: `residual-${number(i, 3)}.png`, bytes: session.png('residual', i) });
      if (onLattice) files.push({ name: `residual-pixels-${number(i, 3)}.png`, bytes: session.png('residual-pixels', i) });
    }
  }
  return files;
}

// The buffers of every typed array in a result, to transfer instead of copy.
function transferables(value, out = new Set()) {
  if (ArrayBuffer.isView(value)) {
    out.add(value.buffer);
  } else if (Array.isArray(value)) {
    for (const item of value) transferables(item, out);
  } else if (value && typeof value === 'object') {
    for (const item of Object.values(value)) transferables(item, out);
  }
  return [...out];
}
