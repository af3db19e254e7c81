// The page's side of the worker protocol (documented at the top of worker.js):
// requests as promises with progress callbacks, and Cancel by terminating the
// worker and starting a fresh one that is brought back to the same state.

export class WorkerClient {
  constructor() {
    this.nextId = 1;
    this.pending = new Map();
    // Requests that rebuilt the worker's state, replayed after a restart.
    this.history = [];
    this.start();
  }

  start() {
    this.worker = createWorker();
    this.worker.onmessage = (event) => this.receive(event.data);
    this.worker.onerror = (event) => {
      event.preventDefault?.();
      const error = { name: 'InternalError', message: `the worker stopped: ${event.message ?? 'unknown error'}` };
      for (const { reject } of this.pending.values()) reject(error);
      this.pending.clear();
    };
  }

  receive(message) {
    const waiting = this.pending.get(message.id);
    if (!waiting) return;
    if (message.progress) {
      waiting.onProgress?.(message.progress);
      return;
    }
    this.pending.delete(message.id);
    if (message.error) waiting.reject(message.error);
    else waiting.resolve(message.result);
  }

  // Sends one request; resolves with its result or rejects with { name, message }.
  request(op, args = {}, onProgress = null) {
    const id = this.nextId++;
    const message = { id, op, ...args };
    return new Promise((resolve, reject) => {
      this.pending.set(id, { resolve, reject, onProgress });
      this.worker.postMessage(message);
    });
  }

  // Remembers a request that changed the worker's state, to replay after a
  // restart. A request that replaces earlier state makes those forgotten:
  // 'clear' the images, 'open-model' the model (and its lattice),
  // 'restore-report' the report.
  remember(op, args = {}) {
    const replaces = {
      clear: ['add-files', 'add-example', 'remove-image', 'clear'],
      'open-model': ['open-model', 'choose', 'restore-lattice'],
      choose: ['choose'],
      'restore-report': ['restore-report'],
    }[op] ?? [];
    this.history = this.history.filter((m) => !replaces.includes(m.op));
    this.history.push({ op, ...args });
  }

  // Stops whatever the worker is doing: every pending request rejects with
  // Cancelled, a new worker starts and gets the remembered state back.
  async cancel() {
    this.worker.terminate();
    for (const { reject } of this.pending.values()) reject({ name: 'Cancelled', message: 'cancelled' });
    this.pending.clear();
    this.start();
    // Sent together so that no later request can come between them; the
    // worker handles them in order.
    await Promise.all(this.history.map(({ op, ...args }) => this.request(op, args)));
  }
}

// The served page loads worker.js as a module worker. The self-contained page
// (cargo xtask dist) carries the worker's modules inlined into one classic
// script, and the wasm, and starts it from a Blob URL (from file://, Chromium
// runs only classic workers from Blob URLs).
function createWorker() {
  const inline = document.getElementById('orbitspan-worker-source');
  if (!inline) return new Worker(new URL('./worker.js', import.meta.url), { type: 'module' });
  const wasm = document.getElementById('orbitspan-wasm-base64').textContent.trim();
  const source = `globalThis.orbitspanWasmBase64 = '${wasm}';\n${inline.textContent}`;
  return new Worker(URL.createObjectURL(new Blob([source], { type: 'text/javascript' })));
}
