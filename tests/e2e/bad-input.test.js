// A corrupt file among good ones: a clear message beside that file naming it
// and the problem; the good files stay in the stack and fit.

import { test } from 'node:test';
import assert from 'node:assert/strict';
import { openBrowser, serverUrl, demoStack, tempDir, writeFile, waitForFit, shownImageErrors, screenshot } from './harness.js';
import { png16, noiseLevels } from './png16.js';

test('a corrupt file gets a message and the good files fit', async () => {
  const browser = await openBrowser();
  try {
    const { page } = browser;
    await page.goto(await serverUrl());
    const demo = demoStack();
    const dir = tempDir('bad-input');
    // A PNG signature followed by rubbish, and a good image of another size.
    const corrupt = writeFile(dir, 'scratched.png', Buffer.concat([Buffer.from([0x89, 0x50, 0x4e, 0x47, 0x0d, 0x0a, 0x1a, 0x0a]), Buffer.from('no image data here')]));
    const small = writeFile(dir, 'small.png', png16(64, 64, noiseLevels(64 * 64, 7)));
    await page.setInputFiles('#file-input', [demo.files[0], corrupt, demo.files[1], small, demo.files[2]]);
    await page.waitForFunction(() => document.querySelectorAll('#file-list li.failed').length === 2);
    await page.waitForFunction(() => !document.getElementById('fit').disabled);

    const failed = await page.$$eval('#file-list li.failed', (items) => items.map((li) => li.textContent));
    assert.equal(failed.length, 2);
    assert.match(failed[0], /scratched\.png/);
    assert.match(failed[0], /scratched\.png:/, 'the message names the file');
    assert.match(failed[1], /small\.png/);
    assert.match(failed[1], /64x64/, 'the size problem is stated');
    assert.equal(await page.locator('#file-list li.added').count(), 3);
    assert.match(await page.textContent('#stack-summary'), /^3 images · 128 x 128/);
    await screenshot(page, '03-corrupt-file');

    // The good ones fit (the cell defaults to the whole image: plain p1).
    // One generator for three images: each image keeps a positive error
    // (with as many generators as images the fit would be exact).
    await page.selectOption('#group', 'p4m');
    await page.fill('#cell-rows', '16');
    await page.fill('#cell-cols', '16');
    await page.fill('#generators', '1');
    await page.waitForFunction(() => !document.getElementById('fit').disabled);
    await page.click('#fit');
    await waitForFit(page);
    const rows = await shownImageErrors(page);
    assert.deepEqual(rows.map((r) => r.file), ['cloth-1.png', 'cloth-2.png', 'cloth-3.png']);
    assert.ok(rows.every((r) => r.error > 0 && r.relative_error < 0.5));
    // The message stays beside the file after the fit.
    assert.equal(await page.locator('#file-list li.failed').count(), 2);
  } finally {
    await browser.close();
  }
});
