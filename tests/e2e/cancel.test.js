// Cancel during a long fit: the worker is stopped and restarted, the stack,
// the settings and the earlier results stay (the earlier model too: saving
// it gives the same file), and a new fit runs.

import { test } from 'node:test';
import assert from 'node:assert/strict';
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { openBrowser, serverUrl, tempDir, writeFile, waitForFit, shownCurve, readControls, screenshot } from './harness.js';
import { png16, noiseLevels } from './png16.js';

// Clicks "Save model" and returns the downloaded file's bytes.
async function savedModel(page, dir, name) {
  const downloading = page.waitForEvent('download');
  await page.click('#save-model');
  const download = await downloading;
  const path = join(dir, name);
  await download.saveAs(path);
  return readFileSync(path);
}

test('cancel keeps the stack and the results, and a new fit runs', async (t) => {
  const browser = await openBrowser();
  try {
    const { page } = browser;
    await page.goto(await serverUrl());
    // 256 tiles of 32 x 32 from one 512 x 512 noise image.
    const dir = tempDir('cancel');
    const big = writeFile(dir, 'noise.png', png16(512, 512, noiseLevels(512 * 512, 99)));
    await page.check('#tile-on');
    await page.fill('#tile-rows', '32');
    await page.fill('#tile-cols', '32');
    await page.setInputFiles('#file-input', [big]);
    await page.waitForFunction(() => document.getElementById('stack-summary').textContent.startsWith('256 images'));
    await page.fill('#generators', '2');
    await page.waitForFunction(() => !document.getElementById('fit').disabled);

    // A quick fit first (p1: Gram matrices of 256 x 256): the earlier result.
    assert.equal((await readControls(page)).group, 'p1');
    await page.click('#fit');
    await waitForFit(page);
    const earlier = await shownCurve(page);
    assert.equal(earlier.length, 2);
    const earlierModel = await savedModel(page, dir, 'before.orbitspan-model');

    // p4m makes the fit long (covariance matrices of 1024 x 1024 from 2048 columns).
    // The finished fit folded the Symmetry card; open it again.
    await page.click('#card-symmetry > summary');
    await page.selectOption('#group', 'p4m');
    await page.waitForFunction(() => !document.getElementById('fit').disabled);
    await page.click('#fit');
    await page.waitForFunction(() => /\d+ %$/.test(document.getElementById('progress-text').textContent));
    await screenshot(page, '04-fitting');
    const stage = await page.textContent('#progress-text');
    t.diagnostic(`cancelled at: ${stage}`);
    await page.click('#cancel');
    await page.waitForFunction(() => document.getElementById('fit-status').textContent.startsWith('Fit cancelled'));
    await screenshot(page, '05-cancelled');

    assert.equal(await page.isHidden('#cancel'), true);
    assert.match(await page.textContent('#stack-summary'), /^256 images · 32 x 32/);
    assert.equal((await readControls(page)).group, 'p4m', 'settings kept');
    assert.deepEqual(await shownCurve(page), earlier, 'earlier results kept');
    assert.equal(await page.locator('#gallery figure').count(), 2);
    // The restarted worker made the earlier model again (from what the page
    // kept of it): the same file.
    assert.ok((await savedModel(page, dir, 'after.orbitspan-model')).equals(earlierModel), 'earlier model kept');

    // A new fit runs in the restarted worker on the restored stack.
    await page.selectOption('#group', 'p1');
    await page.waitForFunction(() => !document.getElementById('fit').disabled);
    await page.click('#fit');
    await waitForFit(page);
    assert.deepEqual(await shownCurve(page), earlier, 'the restored stack fits to the same numbers');
  } finally {
    await browser.close();
  }
});
