// Export: one zip with the pictures, arrays, tables and report.json; the
// zip is well formed (checked with an independent reader below, CRC-32 per
// entry) and its report and CSV hold the numbers shown.

import { test } from 'node:test';
import assert from 'node:assert/strict';
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { openBrowser, serverUrl, useExampleAndFit, shownCurve, tempDir } from './harness.js';
import { crc32 } from './png16.js';

// Reads a stored (uncompressed) zip through its central directory (PKWARE APPNOTE 4.3).
function readZip(bytes) {
  const end = bytes.lastIndexOf(Buffer.from([0x50, 0x4b, 0x05, 0x06]));
  assert.ok(end >= 0, 'end of central directory record');
  const count = bytes.readUInt16LE(end + 10);
  let at = bytes.readUInt32LE(end + 16);
  const entries = new Map();
  for (let i = 0; i < count; i++) {
    assert.equal(bytes.readUInt32LE(at), 0x02014b50, 'central directory header');
    const method = bytes.readUInt16LE(at + 10);
    const crc = bytes.readUInt32LE(at + 16);
    const size = bytes.readUInt32LE(at + 24);
    const nameLength = bytes.readUInt16LE(at + 28);
    const extra = bytes.readUInt16LE(at + 30);
    const comment = bytes.readUInt16LE(at + 32);
    const local = bytes.readUInt32LE(at + 42);
    const name = bytes.subarray(at + 46, at + 46 + nameLength).toString('utf8');
    assert.equal(method, 0, `${name} is stored`);
    assert.equal(bytes.readUInt32LE(local), 0x04034b50, 'local file header');
    const start = local + 30 + bytes.readUInt16LE(local + 26) + bytes.readUInt16LE(local + 28);
    const data = bytes.subarray(start, start + size);
    assert.equal(crc32(data), crc, `CRC-32 of ${name}`);
    entries.set(name, data);
    at += 46 + nameLength + extra + comment;
  }
  return entries;
}

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
