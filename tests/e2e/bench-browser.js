// In-browser timing for `cargo xtask bench` (issue 5). For every workload
// that `orbitspan-bench --write-files DIR` wrote (DIR/<name>/workload.json
// and its images), a fresh headless Chromium fits the files through the
// app's worker (web/worker.js, wasm), timing each fit inside the page twice
// over: the worker's own measure of the fit request and the time from
// posting the request to its result. Two clients in the page, fits
// interleaved: one worker alone, and one worker per core (the page's
// default: the fit's tasks spread over helper workers), with the spread
// fit's own breakdown (before the tasks, after them, the tasks' work summed
// over workers). After each one-worker fit the page's next requests are
// timed too: the first image's pictures and the model file. The workers'
// wasm memory sizes after all that are their peaks. Writes
// DIR/browser.json for orbitspan-bench --browser DIR, which times the
// native fit of the same decoded files.
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
    await page.route('**/favicon.ico', (route) => route.fulfill({ status: 204 }));
    await page.goto(new URL('worker-client.js', url).href);
    const outcome = await page.evaluate(async ({ description, reps }) => {
      const { WorkerClient, defaultWorkerCount } = await import('./worker-client.js');
      const client = new WorkerClient({ workers: 1 });
      const workers = defaultWorkerCount();
      const spread = workers > 1 ? new WorkerClient({ workers }) : null;
      const files = [];
      for (const file of description.files) {
        const response = await fetch(`bench-data/${encodeURIComponent(file)}`);
        files.push({ name: file, bytes: new Uint8Array(await response.arrayBuffer()) });
      }
      const added = await client.request('add-files', { files, tile: description.tile });
      if (added.failed.length) return { error: JSON.stringify(added.failed) };
      if (spread) await spread.request('add-files', { files, tile: description.tile });
      const worker = [];
      const pageSeconds = [];
      const spreadSeconds = [];
      const spreadTiming = [];
      const pictureSeconds = [];
      const nextPictureSeconds = [];
      const modelFileSeconds = [];
      const since = (start) => (performance.now() - start) / 1000;
      for (let i = 0; i < reps; i++) {
        const start = performance.now();
        const result = await client.request('fit', { settings: description.settings });
        pageSeconds.push(since(start));
        worker.push(result.seconds);
        // What the page asks for next: the first image's pictures (original,
        // fitted, residual), then the model file.
        const picturesStart = performance.now();
        await client.request('pictures', { index: 0 });
        pictureSeconds.push(since(picturesStart));
        // Then the next image's (the model's spectra made by now), as when
        // the user steps through the stack.
        const nextStart = performance.now();
        await client.request('pictures', { index: Math.min(1, added.images.length - 1) });
        nextPictureSeconds.push(since(nextStart));
        const fileStart = performance.now();
        await client.request('model-bytes');
        modelFileSeconds.push(since(fileStart));
        if (spread) {
          const wide = await spread.request('fit', { settings: description.settings });
          if (JSON.stringify(wide.report) !== JSON.stringify(result.report)) return { error: 'the spread fit differs from the fit in one worker' };
          spreadSeconds.push(wide.seconds);
          spreadTiming.push(wide.timing);
        }
      }
      const memory = await client.request('memory');
      const spreadMemory = spread ? await spread.request('memory') : null;
      return {
        images: added.images.length, worker, pageSeconds, pictureSeconds, nextPictureSeconds, modelFileSeconds, memory: memory.bytes,
        workers, spreadSeconds, spreadTiming,
        spreadMemory: spreadMemory ? spreadMemory.bytes + spreadMemory.helpers.reduce((a, b) => a + b, 0) : 0,
      };
    }, { description, reps });
    if (outcome.error) throw new Error(`${name}: ${outcome.error}`);
    if (browser.errors.length) throw new Error(`${name}: page errors: ${browser.errors.join('; ')}`);
    console.error(`browser ${name}: ${outcome.images} images, worker ${outcome.worker.map((s) => s.toFixed(3)).join(' ')} s, `
      + `page ${outcome.pageSeconds.map((s) => s.toFixed(3)).join(' ')} s, wasm memory ${(outcome.memory / 1e6).toFixed(1)} MB; `
      + `${outcome.workers} workers ${outcome.spreadSeconds.map((s) => s.toFixed(3)).join(' ')} s`);
    results.push({
      name, images: outcome.images, worker_seconds: outcome.worker, page_seconds: outcome.pageSeconds,
      picture_seconds: outcome.pictureSeconds, next_picture_seconds: outcome.nextPictureSeconds,
      model_file_seconds: outcome.modelFileSeconds,
      wasm_memory_bytes: outcome.memory,
      workers: outcome.workers, spread_seconds: outcome.spreadSeconds, spread_timing: outcome.spreadTiming,
      spread_memory_bytes: outcome.spreadMemory,
    });
  } finally {
    await browser.close();
  }
}
writeFileSync(join(dir, 'browser.json'), JSON.stringify(results, null, 2));
console.error(`wrote ${join(dir, 'browser.json')}`);
process.exit(0);
