// The honeycomb micrograph example (a hexagonal lattice at 17 degrees to the
// pixels with a 9.6 px spacing, core demo::honeycomb_micrograph): measure the
// lattice, survey the groups, fit p6m on the measured lattice. The curve
// shown equals the command line's `fit --lattice detect` report to 1e-9
// relative; the vacancy image has the largest error.

import { test } from 'node:test';
import assert from 'node:assert/strict';
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import {
  openBrowser, serverUrl, waitForFit, shownCurve, shownImageErrors, demoStack, tempDir, runCli,
  maxRelativeDifference, canvasIsDrawn, screenshot, readZip,
} from './harness.js';

// The command line's report for the micrograph files with a measured lattice,
// and the folder of its --out files.
function cliMeasuredFit(files, { group, samples, generators, frequencies }) {
  const dir = tempDir('cli-measured');
  const report = join(dir, 'report.json');
  const out = join(dir, 'out');
  runCli([
    'fit', '--group', group, '--lattice', 'detect', '--samples', String(samples), '--generators', String(generators),
    '--band-frequencies', String(frequencies), '--report', report, '--out', out, ...files,
  ]);
  return { report: JSON.parse(readFileSync(report, 'utf8')), out };
}

async function useMicrograph(page) {
  await page.goto(await serverUrl());
  await page.selectOption('#example-choice', 'honeycomb-micrograph');
  await page.click('#use-example');
  await page.waitForFunction(() => document.querySelectorAll('#thumbs button').length === 6);
  await page.waitForFunction(() => !document.getElementById('fit').disabled);
}

test('honeycomb micrograph: measure, survey and fit p6m on the measured lattice as the command line does', async (t) => {
  const browser = await openBrowser();
  try {
    const { page } = browser;
    await useMicrograph(page);
    // The example's suggested settings (core demo: measure the lattice, p6m, 10 samples, L = 1, 61 frequencies).
    assert.equal(await page.inputValue('#lattice-mode'), 'detect');
    assert.equal(await page.inputValue('#group'), 'p6m');
    assert.equal(await page.inputValue('#samples'), '10');
    assert.equal(await page.inputValue('#generators'), '1');
    assert.equal(await page.inputValue('#band-kind'), 'frequencies');
    assert.equal(await page.inputValue('#band-value'), '61');
    // The settings link holds the measured-lattice settings, never data.
    const hash = new URLSearchParams((await page.evaluate(() => location.hash)).slice(1));
    assert.equal(hash.get('measure'), 'detect');
    assert.equal(hash.get('samples'), '10');
    // Groups the hexagonal lattice does not allow are disabled with the reason.
    const p4m = await page.$eval('#group option[value="p4m"]', (o) => ({ disabled: o.disabled, title: o.title }));
    assert.ok(p4m.disabled, 'p4m is offered on a hexagonal lattice');
    assert.match(p4m.title, /needs a square lattice; the lattice is hexagonal/);

    await page.click('#measure');
    await page.waitForFunction(() => document.getElementById('lattice-info').dataset.lengths);
    const measured = await page.$eval('#lattice-info', (p) => ({ lengths: p.dataset.lengths.split(',').map(Number), angle: Number(p.dataset.angle), kind: p.dataset.kind, text: p.textContent }));
    t.diagnostic(`measured: ${measured.text}`);
    assert.equal(measured.kind, 'hexagonal');
    // The demo's lattice is generated with spacing 9.6 px at 60 degrees (core demo::honeycomb_micrograph).
    for (const length of measured.lengths) assert.ok(Math.abs(length - 9.6) < 0.01, `length ${length} px`);
    assert.ok(Math.abs(measured.angle - 60) < 0.05, `angle ${measured.angle} degrees`);
    await page.check('#show-cell');
    await screenshot(page, 'measured-01-lattice');

    await page.click('#survey');
    await page.waitForFunction(() => document.querySelectorAll('#survey-table tbody tr').length > 0, null, { timeout: 300000 });
    const rows = await page.$$eval('#survey-table tbody tr', (trs) => trs.map((r) => ({ group: r.dataset.group, cellDeviation: Number(r.dataset.cellDeviation), text: r.textContent })));
    t.diagnostic(`survey: ${rows.map((r) => `${r.group} ${(100 * r.cellDeviation).toFixed(3)} %`).join(', ')}`);
    assert.equal(rows[0].group, 'p6m');
    assert.equal(rows.length, 7, 'the hexagonal lattice allows p1, p2, p3, p3m1, p31m, p6, p6m');
    assert.match(await page.textContent('#survey-explanation'), /a suggestion, not a proof/);
    // Choosing a row chooses its group.
    await page.click('#survey-table tbody tr[data-group="p3"]');
    assert.equal(await page.inputValue('#group'), 'p3');
    await page.click('#survey-table tbody tr[data-group="p6m"]');
    assert.equal(await page.inputValue('#group'), 'p6m');
    await screenshot(page, 'measured-02-survey');

    await page.waitForFunction(() => !document.getElementById('fit').disabled);
    await page.click('#fit');
    const seconds = await waitForFit(page, 300000);
    t.diagnostic(`in-browser measured fit: ${seconds} s`);

    const demo = demoStack('honeycomb-micrograph');
    const { report: cli, out: cliOut } = cliMeasuredFit(demo.files, { group: 'p6m', samples: 10, generators: 1, frequencies: 61 });
    const shown = await shownCurve(page);
    assert.deepEqual(shown.map((p) => p.generators), cli.error_curve.map((p) => p.generators));
    const curveDifference = maxRelativeDifference(shown.map((p) => p.error), cli.error_curve.map((p) => p.error));
    const relativeDifference = maxRelativeDifference(shown.map((p) => p.relative_error), cli.error_curve.map((p) => p.relative_error));
    t.diagnostic(`page vs command line: error ${curveDifference.toExponential(2)}, relative error ${relativeDifference.toExponential(2)} (largest relative difference)`);
    assert.ok(curveDifference <= 1e-9, `error curve differs by ${curveDifference} relative`);
    assert.ok(relativeDifference <= 1e-9, `relative error curve differs by ${relativeDifference} relative`);

    const images = await shownImageErrors(page);
    const imageDifference = maxRelativeDifference(images.map((r) => r.error), cli.images.map((r) => r.error));
    assert.ok(imageDifference <= 1e-9, `per-image errors differ by ${imageDifference} relative`);
    const worst = images.reduce((a, b) => (b.relative_error > a.relative_error ? b : a));
    assert.equal(worst.file, 'micrograph-3', 'the vacancy image has the largest error');
    assert.match(await page.textContent('#image-errors-caption'), /lattice grid/);
    assert.ok(await page.isVisible('#curve-grid-note'));
    assert.match(await page.textContent('#model-info'), /lattice grid/);

    // The vacancy image: pictures in pixel geometry, residual drawn.
    await page.click('#thumbs button[data-index="2"]');
    await page.waitForFunction(() => /micrograph-3/.test(document.getElementById('image-name').textContent));
    await page.waitForTimeout(300);
    for (const selector of ['#pane-original', '#pane-fitted', '#pane-residual']) {
      assert.ok(await canvasIsDrawn(page, selector), `${selector} is blank or constant`);
    }
    await screenshot(page, 'measured-03-fitted-vacancy');

    // The export says which coordinates its arrays are in, and holds the residuals mapped back to the pixels.
    await page.click('#export-open');
    const downloading = page.waitForEvent('download');
    await page.click('#export-download');
    const path = join(tempDir('measured-export'), 'export.zip');
    await (await downloading).saveAs(path);
    const entries = readZip(readFileSync(path));
    for (const name of ['report.json', 'lattice.json', 'generators.npy', 'residuals.npy', 'residual-pixels-003.png']) {
      assert.ok(entries.has(name), `${name} in the zip`);
    }
    const lattice = JSON.parse(entries.get('lattice.json').toString('utf8'));
    assert.match(lattice.coordinates, /on the lattice grid/);
    assert.equal(lattice.kind, 'hexagonal');
    const exported = JSON.parse(entries.get('report.json').toString('utf8'));
    assert.ok(maxRelativeDifference(exported.error_curve.map((p) => p.error), cli.error_curve.map((p) => p.error)) <= 1e-9);
    // The vacancy image's residual in pixel geometry: the same picture as the command line's.
    assert.ok(entries.get('residual-pixels-003.png').equals(readFileSync(join(cliOut, 'residual-pixels-003.png'))), 'residual-pixels-003.png differs from the command line\'s');
    assert.deepEqual(browser.errors, []);
  } finally {
    await browser.close();
  }
});

test('typed lattice vectors: measured and refused groups as for the detected lattice', async () => {
  const browser = await openBrowser();
  try {
    const { page } = browser;
    await useMicrograph(page);
    await page.selectOption('#lattice-mode', 'vectors');
    // Two vectors of the demo's lattice (9.6 px at 17 and 77 degrees from the rows, core demo), one of them negated.
    const rad = Math.PI / 180;
    const a1 = [9.6 * Math.cos(17 * rad), 9.6 * Math.sin(17 * rad)];
    const a2 = [-9.6 * Math.cos(77 * rad), -9.6 * Math.sin(77 * rad)];
    await page.fill('#a1-row', String(a1[0]));
    await page.fill('#a1-col', String(a1[1]));
    await page.fill('#a2-row', String(a2[0]));
    await page.fill('#a2-col', String(a2[1]));
    await page.click('#measure');
    await page.waitForFunction(() => document.getElementById('lattice-info').dataset.lengths);
    const measured = await page.$eval('#lattice-info', (p) => ({ lengths: p.dataset.lengths.split(',').map(Number), angle: Number(p.dataset.angle), kind: p.dataset.kind }));
    assert.equal(measured.kind, 'hexagonal');
    for (const length of measured.lengths) assert.ok(Math.abs(length - 9.6) < 1e-9, `length ${length}`);
    // Reduction turns the 120-degree pair into the 60-degree basis.
    assert.ok(Math.abs(measured.angle - 60) < 1e-9, `angle ${measured.angle}`);
    const hash = new URLSearchParams((await page.evaluate(() => location.hash)).slice(1));
    assert.equal(hash.get('measure'), 'vectors');
    assert.deepEqual(hash.get('a1').split(',').map(Number), a1);
    // Parallel vectors are refused with a message.
    await page.fill('#a2-row', String(2 * a1[0]));
    await page.fill('#a2-col', String(2 * a1[1]));
    await page.waitForFunction(() => /span no lattice/.test(document.getElementById('settings-problem').textContent));
    assert.ok(await page.isDisabled('#fit'));
    assert.deepEqual(browser.errors, []);
  } finally {
    await browser.close();
  }
});
