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
//   fit            settings                     { report, generators: [picture], model, record, seconds,
//                                                 lattice: null | { lattice, grid, resampling_error,
//                                                 image_deviation, cell_deviation, noise_level },
//                                                 workers, solvedBy: null | [tasks solved here, by helper 1, ...],
//                                                 imagesBy: null | [generator images made here, by helper 1, ...],
//                                                 timing: null | { begin, finish, tasks, handling } seconds:
//                                                 before the tasks, after them, solving them (generator
//                                                 tasks too) summed over workers, and making their bytes
//                                                 and taking in their answers here }
//   restore-report report                       null (the report of an earlier fit, after a restart)
//   restore-lattice info                        null (the lattice of an earlier fit's model, after a restart)
//   choose         count                        { model }
//   model-bytes    -                            { bytes } the current model's file (.orbitspan-model)
//   restore-model  record, generators:          { model } (a fit's model after a restart, from the fit's
//                  [Float64Array]                 record and its generator pictures' values)
//   pictures       index                        { original, fitted, residual, problem }
//   open-model     name, bytes                  { model, generators: [picture] }
//   apply          -                            { errors: [{ file, energy, error, relative_error }], seconds }
//   export         parts: { pictures, arrays,   { files: [{ name, bytes }] }
//                  report }
//   legend         width                        picture of the residual colour scale, −1 … 1
//   memory         -                            { bytes, helpers: [bytes] } the wasm memory's size here and in
//                                                each helper (it only grows: the peak so far)
//   helpers        ports: [MessagePort]         { helpers } (sent by the page at start: channels to helpers)
//   serve          port: MessagePort            null (sent by the page at start: become a helper)
// where images = [{ label, height, width }] is the whole stack after the
// change, record is the fit's model without its generators (text, for
// restore-model) and model = { settings, height, width, generators, grid }; grid is
// null, or { samples, cells } when the model is on a measured lattice's grid
// (then the report's errors are on that grid, pictures are mapped back to the
// pixels, and an export also holds lattice.json and residual-pixels-NNN.png).
//
// Cancel: the page terminates this worker and starts a new one, then sends
// the requests that rebuild the stack and the model (web/worker-client.js).
//
// Helpers. The same script serves as a helper worker: after 'serve' it only
// answers on its port   { id, op: 'solve', bytes } -> { id, bytes, seconds }   (a
// fit task's or generator task's answer, wasm FitTaskSolver) and { id, op: 'memory' } -> { id, bytes },
// or { id, error }. With helpers, a fit begins here (transforms, band,
// tasks cut: Session.fitBegin), hands tasks out one by one (two in flight
// per helper, so none waits while this worker computes), solves tasks here
// too, then hands out the generator images the same way (one task per
// generator: its inverse transform), and finishes here. Every task's
// answer is the same wherever it is solved, so the fit is bit-identical to
// the fit in one worker.

import init, { Session, FitTaskSolver, residualLegend } from './pkg/orbitspan_wasm.js';

let wasm = null;
const ready = startWasm();
let session = null;
let queue = Promise.resolve();
// Channels to helper workers (HelperLink), and this worker's own task solver.
let helpers = [];
let solver = null;

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
    const result = await run(op, message, progressReporter(id));
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

async function run(op, m, progress) {
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
      const { report, solvedBy, imagesBy, timing } = helpers.length
        ? await fitSpread(m.settings, progress)
        : { report: session.fit(m.settings, progress), solvedBy: null, imagesBy: null, timing: null };
      const seconds = (performance.now() - start) / 1000;
      return {
        report, seconds, workers: helpers.length + 1, solvedBy, imagesBy, timing,
        generators: session.generatorPictures(), model: session.modelInfo(), record: session.modelRecord(),
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
      return { model: session.chooseGenerators(m.count) };
    case 'model-bytes':
      return { bytes: session.modelBytes() };
    case 'restore-model':
      return { model: session.restoreModel(m.record, m.generators) };
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
      return {
        bytes: wasm.memory.buffer.byteLength,
        helpers: await Promise.all(helpers.map(async (h) => (await h.request('memory')).bytes)),
      };
    case 'helpers':
      helpers = m.ports.map((port) => new HelperLink(port));
      return { helpers: helpers.length };
    case 'serve':
      serve(m.port);
      return null;
    case 'legend':
      return residualLegend(m.width);
    default:
      throw new Error(`unknown request '${op}'`);
  }
}

// A fit spread over this worker and the helpers (see the top of this file):
// first the orbit tasks, then the generator images, one task each.
async function fitSpread(settings, progress) {
  const started = performance.now();
  const tasks = session.fitBegin(settings, progress);
  const begun = performance.now();
  solver ??= new FitTaskSolver();
  // Time spent solving tasks, summed over the workers, and time this worker
  // spent making tasks' bytes and taking in answers.
  const work = { seconds: 0, handling: 0 };
  try {
    progress('fitting frequencies', 0);
    const solvedBy = await spread(tasks, (k) => session.fitTask(k), 'fitting frequencies', progress, work);
    const generators = session.fitGeneratorTasks();
    progress('building generators', 0);
    const imagesBy = await spread(generators, (l) => session.fitGeneratorTask(l), 'building generators', progress, work);
    const solved = performance.now();
    const report = session.fitFinish(progress);
    const timing = {
      begin: (begun - started) / 1000, finish: (performance.now() - solved) / 1000, tasks: work.seconds, handling: work.handling,
    };
    return { report, solvedBy, imagesBy, timing };
  } catch (error) {
    session.fitAbort();
    throw error;
  }
}

// Hands out tasks 0..count (bytes from taskOf) to the helpers, two in flight
// per helper so that none waits while this worker computes, and solves
// tasks here too; every answer goes to session.fitAccept. Returns how many
// tasks were solved here (index 0) and by each helper.
async function spread(count, taskOf, stage, progress, work) {
  let next = 0;
  let done = 0;
  let failed = false;
  const solvedBy = new Array(helpers.length + 1).fill(0);
  const take = () => (failed || next >= count ? -1 : next++);
  const bytesOf = (k) => {
    const start = performance.now();
    const bytes = taskOf(k);
    work.handling += (performance.now() - start) / 1000;
    return bytes;
  };
  const accept = (answer, by) => {
    const start = performance.now();
    session.fitAccept(answer);
    work.handling += (performance.now() - start) / 1000;
    solvedBy[by]++;
    done++;
    progress(stage, done / count);
  };
  const viaHelper = async (link, by) => {
    for (let k = take(); k >= 0; k = take()) {
      const { bytes, seconds } = await link.request('solve', bytesOf(k));
      if (failed) return;
      work.seconds += seconds;
      accept(bytes, by);
    }
  };
  const here = async () => {
    for (let k = take(); k >= 0; k = take()) {
      const task = bytesOf(k);
      const start = performance.now();
      const answer = solver.solve(task);
      work.seconds += (performance.now() - start) / 1000;
      accept(answer, 0);
      await nextTurn(); // let the helpers' answers in
    }
  };
  try {
    await Promise.all([...helpers.flatMap((link, i) => [viaHelper(link, i + 1), viaHelper(link, i + 1)]), here()]);
  } catch (error) {
    failed = true;
    throw error;
  }
  return solvedBy;
}

// Resolves after the messages already queued for this worker (a macrotask
// through a MessageChannel: timers would be clamped).
const turn = new MessageChannel();
const turnWaiters = [];
turn.port1.onmessage = () => turnWaiters.shift()?.();
function nextTurn() {
  return new Promise((resolve) => {
    turnWaiters.push(resolve);
    turn.port2.postMessage(null);
  });
}

// This worker's end of a channel to a helper: requests as promises.
class HelperLink {
  constructor(port) {
    this.port = port;
    this.nextId = 1;
    this.pending = new Map();
    port.onmessage = ({ data }) => {
      const waiting = this.pending.get(data.id);
      if (!waiting) return;
      this.pending.delete(data.id);
      if (data.error) {
        const error = new Error(data.error.message);
        error.name = data.error.name;
        waiting.reject(error);
      } else {
        waiting.resolve(data);
      }
    };
  }

  request(op, bytes = null) {
    const id = this.nextId++;
    return new Promise((resolve, reject) => {
      this.pending.set(id, { resolve, reject });
      this.port.postMessage({ id, op, bytes }, bytes ? [bytes.buffer] : []);
    });
  }
}

// A helper: answers fit tasks on the port from the worker that hands them out.
function serve(port) {
  const helperSolver = new FitTaskSolver();
  port.onmessage = ({ data }) => {
    try {
      if (data.op === 'solve') {
        const start = performance.now();
        const answer = helperSolver.solve(data.bytes);
        port.postMessage({ id: data.id, bytes: answer, seconds: (performance.now() - start) / 1000 }, [answer.buffer]);
      } else if (data.op === 'memory') {
        port.postMessage({ id: data.id, bytes: wasm.memory.buffer.byteLength });
      } else {
        throw new Error(`unknown helper request '${data.op}'`);
      }
    } catch (error) {
      port.postMessage({ id: data.id, error: { name: error?.name ?? 'InternalError', message: String(error?.message ?? error) } });
    }
  };
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
