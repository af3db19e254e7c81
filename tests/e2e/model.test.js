// Save a model, reload the page, open the model and apply it to images:
// the per-image errors equal the command line's `apply` to 1e-9 relative.

import { test } from 'node:test';
import assert from 'node:assert/strict';
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { openBrowser, serverUrl, useExampleAndFit, demoStack, tempDir, runCli, shownImageErrors, maxRelativeDifference, screenshot } from './harness.js';

test('a saved model, opened after a reload and applied, matches the command line', async (t) => {
  const browser = await openBrowser();
  try {
    const { page } = browser;
    await page.goto(await serverUrl());
    await useExampleAndFit(page);
    // Use 3 of the 4 generators: saving follows the choice.
    await page.click('#curve circle[data-generators="3"]');
    await page.waitForFunction(() => document.getElementById('model-info').textContent.includes('3 generators'));
    const downloading = page.waitForEvent('download');
    await page.click('#save-model');
    const download = await downloading;
    assert.match(download.suggestedFilename(), /^orbitspan-p4m-L3\.orbitspan-model$/);
    const dir = tempDir('model');
    const modelPath = join(dir, download.suggestedFilename());
    await download.saveAs(modelPath);

    await page.reload();
    const demo = demoStack();
    const images = demo.files.slice(0, 5);
    await page.setInputFiles('#file-input', images);
    await page.waitForFunction(() => document.getElementById('stack-summary').textContent.startsWith('5 images'));
    await page.locator('#card-results').evaluate((card) => { card.open = true; });
    await page.setInputFiles('#model-input', [modelPath]);
    await page.waitForFunction(() => document.getElementById('model-info').textContent.startsWith('From the file'));
    await page.click('#apply-model');
    await page.waitForFunction(() => document.getElementById('model-status').textContent.startsWith('Applied'));
    await screenshot(page, '06-model-applied');
    const shown = await shownImageErrors(page);

    const out = join(dir, 'cli-apply');
    const reportPath = join(dir, 'apply.json');
    runCli(['apply', '--model', modelPath, '--out', out, '--report', reportPath, ...images]);
    const cli = JSON.parse(readFileSync(reportPath, 'utf8'));
    assert.equal(shown.length, cli.images.length);
    const difference = maxRelativeDifference(shown.map((r) => r.error), cli.images.map((r) => r.error));
    t.diagnostic(`largest relative difference of residual energies, page vs command line apply: ${difference.toExponential(2)}`);
    assert.ok(difference <= 1e-9, `residual energies differ by ${difference} relative`);
    assert.ok(shown.every((r) => r.error > 0));
  } finally {
    await browser.close();
  }
});
