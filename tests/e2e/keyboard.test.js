// Keyboard only: Tab and Enter start a fit and reach its results.

import { test } from 'node:test';
import assert from 'node:assert/strict';
import { openBrowser, serverUrl, waitForFit, screenshot } from './harness.js';

// Presses Tab until the focused element matches `selector`; fails after `limit` presses.
async function tabTo(page, selector, limit = 80) {
  for (let i = 0; i < limit; i++) {
    await page.keyboard.press('Tab');
    if (await page.evaluate((s) => document.activeElement?.matches(s) ?? false, selector)) return i + 1;
  }
  throw new Error(`Tab never reached ${selector}`);
}

test('a fit can be started and its results reached with Tab and Enter', async (t) => {
  const browser = await openBrowser();
  try {
    const { page } = browser;
    await page.goto(await serverUrl());
    await page.waitForFunction(() => document.getElementById('group').options.length > 0);
    const toExample = await tabTo(page, '#use-example');
    await page.keyboard.press('Enter');
    await page.waitForFunction(() => !document.getElementById('fit').disabled);
    const toFit = await tabTo(page, '#fit');
    await page.keyboard.press('Enter');
    await waitForFit(page);
    t.diagnostic(`Tab presses: ${toExample} to the example button, ${toFit} more to Fit`);

    // The results: a point of the error curve, chosen with Enter.
    await tabTo(page, '#curve circle[data-generators="2"]');
    await screenshot(page, '10-keyboard-focus');
    const outline = await page.evaluate(() => getComputedStyle(document.activeElement).stroke);
    assert.ok(outline, 'the focused point is styled');
    await page.keyboard.press('Enter');
    await page.waitForFunction(() => document.getElementById('image-errors-caption').textContent.endsWith('L = 2'));
    // The per-image table's first image button is reachable too.
    await tabTo(page, '#image-errors tbody button');
    assert.equal(await page.evaluate(() => document.activeElement.textContent), 'cloth-1');
  } finally {
    await browser.close();
  }
});
