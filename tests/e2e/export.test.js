// Export: one zip with the pictures, arrays, tables and report.json; the
// zip is well formed (checked with an independent reader, harness readZip,
// CRC-32 per entry) and its report and CSV hold the numbers shown.

import { test } from 'node:test';
import assert from 'node:assert/strict';
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { openBrowser, serverUrl, useExampleAndFit, shownCurve, tempDir, readZip } from './harness.js';

test('export writes one well-formed zip with the shown numbers', async () => {
  const browser = await openBrowser();
  try {
    const { page } = browser;
    await page.goto(await serverUrl());
    const { settings } = await useExampleAndFit(page);
    await page.click('#export-open');
    const downloading = page.waitForEvent('download');
    await page.click('#export-download');
    const download = await downloading;
    assert.equal(download.suggestedFilename(), 'orbitspan-export.zip');
    const path = join(tempDir('export'), 'export.zip');
    await download.saveAs(path);
    const entries = readZip(readFileSync(path));

    const images = 8;
    for (const name of ['report.json', 'generators.npy', 'approximations.npy', 'residuals.npy', 'error-curve.csv', 'image-errors.csv', 'generator-01.png', `residual-00${images}.png`]) {
      assert.ok(entries.has(name), `${name} in the zip`);
    }
    assert.equal([...entries.keys()].filter((n) => n.startsWith('generator-')).length, settings.generators);

    const report = JSON.parse(entries.get('report.json').toString('utf8'));
    assert.equal(report.format, 'orbitspan-report');
    const shown = await shownCurve(page);
    assert.deepEqual(report.error_curve.map((p) => p.error), shown.map((p) => p.error));

    const csvLines = entries.get('error-curve.csv').toString('utf8').trim().split('\r\n');
    assert.equal(csvLines[0], 'generators,error,relative_error');
    assert.deepEqual(csvLines.slice(1).map((line) => Number(line.split(',')[1])), shown.map((p) => p.error));

    // NumPy .npy v1.0 header (numpy.lib.format): magic, version, little-endian f8, shape.
    const npy = entries.get('residuals.npy');
    assert.equal(npy.subarray(0, 6).toString('latin1'), '\x93NUMPY');
    const header = npy.subarray(10, 10 + npy.readUInt16LE(8)).toString('latin1');
    assert.match(header, /'descr': '<f8'/);
    assert.match(header, new RegExp(`'shape': \\(${images}, 128, 128\\)`));
    assert.equal(npy.length, 10 + npy.readUInt16LE(8) + images * 128 * 128 * 8);
    const png = entries.get('generator-01.png');
    assert.deepEqual([...png.subarray(0, 8)], [0x89, 0x50, 0x4e, 0x47, 0x0d, 0x0a, 0x1a, 0x0a]);
  } finally {
    await browser.close();
  }
});
