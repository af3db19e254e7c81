// In-browser timing for `cargo xtask bench` (issue 5). For every workload
// that `orbitspan-bench --write-files DIR` wrote (DIR/<name>/workload.json
// and its images), a fresh headless Chromium fits the files through the
// app's worker (web/worker.js, one worker, wasm), timing each fit inside the
// page twice over: the worker's own measure of the fit request and the time
// from posting the request to its result. The worker's wasm memory size
// after the fits is its peak. Writes DIR/browser.json for orbitspan-bench
// --browser DIR, which times the native fit of the same decoded files.
//
//   node tests/e2e/bench-browser.js DIR [--reps N]
//
// The files reach the page from this script (page.route), so the page makes
// no request that leaves the served origin.

import { readFileSync, readdirSync, writeFileSync, existsSync } from 'node:fs';
import { join } from 'node:path';
import { openBrowser, serverUrl } from './harness.js';

const args = process.argv.slice(2);
const dir = args[0];
const repsAt = args.indexOf('--reps');
const reps = repsAt >= 0 ? Number(args[repsAt + 1]) : 3;
if (!dir || !(reps >= 1)) {
  console.error('usage: node tests/e2e/bench-browser.js DIR [--reps N]');
  process.exit(2);
}

const results = [];
const url = await serverUrl();
for (const name of readdirSync(dir).sort()) {
  const descriptionPath = join(dir, name, 'workload.json');
  if (!existsSync(descriptionPath)) continue;
  const description = JSON.parse(readFileSync(descriptionPath, 'utf8'));
  const browser = await openBrowser();
  try {
    const { page } = browser;
    await page.route('**/bench-data/**', (route) => {
      const file = decodeURIComponent(new URL(route.request().url()).pathname.split('/bench-data/')[1]);
      route.fulfill({ status: 200, contentType: 'image/png', body: readFileSync(join(dir, name, file)) });
    });
    // A same-origin document that runs nothing of its own: the worker client
    // module, shown as text.
    await page.goto(new URL('worker-client.js', url).href);
    const outcome = await page.evaluate(async ({ description, reps }) => {
      const { WorkerClient } = await import('./worker-client.js');
      const client = new WorkerClient();
      const files = [];
      for (const file of description.files) {
        const response = await fetch(`bench-data/${encodeURIComponent(file)}`);
        files.push({ name: file, bytes: new Uint8Array(await response.arrayBuffer()) });
      }
      const added = await client.request('add-files', { files, tile: description.tile });
      if (added.failed.length) return { error: JSON.stringify(added.failed) };
      const worker = [];
      const pageSeconds = [];
      for (let i = 0; i < reps; i++) {
        const start = performance.now();
        const result = await client.request('fit', { settings: description.settings });
        pageSeconds.push((performance.now() - start) / 1000);
        worker.push(result.seconds);
      }
      const memory = await client.request('memory');
      return { images: added.images.length, worker, pageSeconds, memory: memory.bytes };
    }, { description, reps });
    if (outcome.error) throw new Error(`${name}: files refused: ${outcome.error}`);
    if (browser.errors.length) throw new Error(`${name}: page errors: ${browser.errors.join('; ')}`);
    console.error(`browser ${name}: ${outcome.images} images, worker ${outcome.worker.map((s) => s.toFixed(3)).join(' ')} s, `
      + `page ${outcome.pageSeconds.map((s) => s.toFixed(3)).join(' ')} s, wasm memory ${(outcome.memory / 1e6).toFixed(1)} MB`);
    results.push({
      name, images: outcome.images, worker_seconds: outcome.worker, page_seconds: outcome.pageSeconds,
      wasm_memory_bytes: outcome.memory,
    });
  } finally {
    await browser.close();
  }
}
writeFileSync(join(dir, 'browser.json'), JSON.stringify(results, null, 2));
console.error(`wrote ${join(dir, 'browser.json')}`);
process.exit(0);
