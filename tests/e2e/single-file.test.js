// The self-contained page (cargo xtask dist) opened from disk fits the
// example stack to the command line's numbers, with no network request.

import { test } from 'node:test';
import assert from 'node:assert/strict';
import { pathToFileURL } from 'node:url';
import { openBrowser, singleFilePath, useExampleAndFit, shownCurve, demoStack, cliFitReport, maxRelativeDifference, canvasIsDrawn, screenshot } from './harness.js';

test('the self-contained HTML file works from file://', async (t) => {
  const browser = await openBrowser();
  try {
    const { page, requests } = browser;
    await page.goto(pathToFileURL(singleFilePath()).href);
    const { settings, seconds } = await useExampleAndFit(page);
    t.diagnostic(`fit from the self-contained file: ${seconds} s`);
    await screenshot(page, '09-single-file');
    const cli = cliFitReport(demoStack().files, settings);
    const shown = await shownCurve(page);
    assert.equal(shown.length, cli.error_curve.length);
    const difference = maxRelativeDifference(shown.map((p) => p.error), cli.error_curve.map((p) => p.error));
    t.diagnostic(`largest relative difference vs command line: ${difference.toExponential(2)}`);
    assert.ok(difference <= 1e-9, `error curve differs by ${difference} relative`);
    assert.ok(await canvasIsDrawn(page, '#pane-residual'));
    const network = requests.map((r) => r.url).filter((u) => !u.startsWith('file:') && !u.startsWith('blob:') && !u.startsWith('data:'));
    assert.deepEqual(network, []);
    assert.deepEqual(browser.errors, []);
  } finally {
    await browser.close();
  }
});
