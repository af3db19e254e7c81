// A fit spread over several workers (worker.js "Helpers") gives exactly the
// fit of one worker: the same report, the same generator values, the same
// model file, on the pixel grid and on a measured lattice; every helper
// solves tasks, and helpers make generator images; and the page says how
// many workers fitted.

import { test } from 'node:test';
import assert from 'node:assert/strict';
import { openBrowser, serverUrl, useExampleAndFit, shownCurve, cliFitReport, demoStack, maxRelativeDifference, screenshot } from './harness.js';

// Fits an example stack with 1 and with 3 workers inside one page, through
// the app's own worker client; returns both results (generator values as
// plain arrays, model files as byte arrays).
async function fitBothWays(page, example, settingsPatch) {
  return page.evaluate(async ({ example, settingsPatch }) => {
    const { WorkerClient } = await import('./worker-client.js');
    const out = {};
    for (const workers of [1, 3]) {
      const client = new WorkerClient({ workers });
      const added = await client.request('add-example', { example });
      const settings = { ...added.settings, ...settingsPatch };
      const stages = new Set();
      const result = await client.request('fit', { settings }, (p) => stages.add(p.stage));
      const memory = await client.request('memory');
      out[workers] = {
        report: result.report,
        workers: result.workers,
        solvedBy: result.solvedBy,
        imagesBy: result.imagesBy,
        generators: result.generators.map((g) => Array.from(g.values)),
        model: Array.from((await client.request('model-bytes')).bytes),
        stages: [...stages],
        helperMemory: memory.helpers,
      };
      client.stop();
    }
    return out;
  }, { example, settingsPatch });
}

function assertSameFit(one, three, what) {
  assert.equal(one.workers, 1);
  assert.equal(one.solvedBy, null, `${what}: one worker fits alone`);
  assert.equal(three.workers, 3);
  assert.equal(three.solvedBy.length, 3);
  three.solvedBy.forEach((count, i) => assert.ok(count >= 1, `${what}: worker ${i} solved ${count} tasks (${three.solvedBy})`));
  // Every generator image made once, and the helpers made some of them.
  assert.equal(one.imagesBy, null);
  assert.equal(three.imagesBy.length, 3);
  assert.equal(three.imagesBy.reduce((a, b) => a + b, 0), one.report.generators.length, `${what}: generator images ${three.imagesBy}`);
  assert.ok(three.imagesBy[1] + three.imagesBy[2] >= 1, `${what}: no generator image made by a helper (${three.imagesBy})`);
  assert.equal(three.helperMemory.length, 2);
  assert.deepEqual(three.report, one.report, `${what}: reports differ`);
  assert.deepEqual(three.generators, one.generators, `${what}: generator values differ`);
  assert.deepEqual(three.model, one.model, `${what}: model files differ`);
  for (const stage of ['transforming images', 'fitting frequencies', 'building generators']) {
    assert.ok(three.stages.includes(stage), `${what}: no progress for '${stage}' (${three.stages})`);
  }
}

test('three workers fit bit-for-bit what one worker fits', async (t) => {
  const browser = await openBrowser();
  try {
    const { page } = browser;
    const url = await serverUrl();
    // A same-origin document that runs nothing of its own (and has no icon).
    await page.route('**/favicon.ico', (route) => route.fulfill({ status: 204 }));
    await page.goto(new URL('worker-client.js', url).href);
    const cloth = await fitBothWays(page, 'woven-cloth', {});
    assertSameFit(cloth[1], cloth[3], 'woven cloth, pixel grid');
    t.diagnostic(`woven cloth: tasks solved per worker ${cloth[3].solvedBy}, generator images ${cloth[3].imagesBy}`);
    const micrograph = await fitBothWays(page, 'honeycomb-micrograph', {});
    assertSameFit(micrograph[1], micrograph[3], 'honeycomb micrograph, measured lattice');
    t.diagnostic(`honeycomb micrograph: tasks solved per worker ${micrograph[3].solvedBy}, generator images ${micrograph[3].imagesBy}`);
    assert.deepEqual(browser.errors, []);
  } finally {
    await browser.close();
  }
});

test('the page with ?workers=3 fits the example to the command line\'s numbers and says so', async (t) => {
  const browser = await openBrowser();
  try {
    const { page } = browser;
    const url = new URL(await serverUrl());
    url.searchParams.set('workers', '3');
    await page.goto(url.href);
    const { settings } = await useExampleAndFit(page);
    const status = await page.locator('#fit-status').textContent();
    assert.match(status, /on 3 workers\.$/, status);
    await screenshot(page, 'workers-3-fitted');
    const cli = cliFitReport(demoStack().files, settings);
    const shown = await shownCurve(page);
    const difference = maxRelativeDifference(shown.map((p) => p.error), cli.error_curve.map((p) => p.error));
    t.diagnostic(`three workers vs command line: largest relative difference ${difference.toExponential(2)}`);
    assert.ok(difference <= 1e-9, `error curve differs by ${difference} relative`);
    assert.deepEqual(browser.errors, []);
  } finally {
    await browser.close();
  }
});
