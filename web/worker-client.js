// The page's side of the worker protocol (documented at the top of worker.js):
// requests as promises with progress callbacks, and Cancel by terminating the
// worker and starting a fresh one that is brought back to the same state.
// With more than one worker, the page also starts helper workers and hands
// the worker a channel to each: fits spread their orbit tasks over them.

// How many workers a fit may use: the cores the browser reports (at most 8).
export function defaultWorkerCount() {
  return Math.max(1, Math.min(8, navigator.hardwareConcurrency || 1));
}

export class WorkerClient {
  // workers: how many workers share a fit's work, this one included (the
  // others are helpers that only solve fit tasks; see worker.js).
  constructor({ workers } = {}) {
    this.workers = Math.max(1, Math.floor(workers ?? defaultWorkerCount()));
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
      this.failAll(`the worker stopped: ${event.message ?? 'unknown error'}`);
    };
    // Helpers talk to the worker over their own channels; the page only
    // starts and stops them. Their replies to 'serve' carry id 0: ignored.
    this.helpers = [];
    const ports = [];
    for (let i = 1; i < this.workers; i++) {
      const helper = createWorker();
      helper.onerror = (event) => {
        event.preventDefault?.();
        this.failAll(`a helper worker stopped: ${event.message ?? 'unknown error'}`);
      };
      const channel = new MessageChannel();
      helper.postMessage({ id: 0, op: 'serve', port: channel.port2 }, [channel.port2]);
      this.helpers.push(helper);
      ports.push(channel.port1);
    }
    if (ports.length) this.worker.postMessage({ id: 0, op: 'helpers', ports }, ports);
  }

  // Rejects every pending request with an InternalError.
  failAll(message) {
    const error = { name: 'InternalError', message };
    for (const { reject } of this.pending.values()) reject(error);
    this.pending.clear();
  }

  stop() {
    this.worker.terminate();
    for (const helper of this.helpers) helper.terminate();
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
  // 'clear' the images, 'open-model' and 'restore-model' the model (and its
  // lattice), 'restore-report' the report.
  remember(op, args = {}) {
    const model = ['open-model', 'restore-model', 'choose', 'restore-lattice'];
    const replaces = {
      clear: ['add-files', 'add-example', 'remove-image', 'clear'],
      'open-model': model,
      'restore-model': model,
      choose: ['choose'],
      'restore-report': ['restore-report'],
    }[op] ?? [];
    this.history = this.history.filter((m) => !replaces.includes(m.op));
    this.history.push({ op, ...args });
  }

  // Stops whatever the worker is doing: every pending request rejects with
  // Cancelled, a new worker starts and gets the remembered state back.
  async cancel() {
    this.stop();
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
