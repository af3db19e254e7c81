// The generators gallery: each tile's share of captured energy, and
// "adds nothing" for generators whose layer is empty. With p1 and the whole
// image as the cell, 8 images span at most 8 dimensions, so generators 9 and
// 10 can add nothing (Eckart–Young: rank of the stack).

import { test } from 'node:test';
import assert from 'node:assert/strict';
import { openBrowser, serverUrl, waitForFit, shownCurve, screenshot } from './harness.js';

test('generators beyond the stack\'s rank are shown as adding nothing', async () => {
  const browser = await openBrowser();
  try {
    const { page } = browser;
    await page.goto(await serverUrl());
    await page.click('#use-example');
    await page.waitForFunction(() => !document.getElementById('fit').disabled);
    await page.selectOption('#group', 'p1');
    await page.fill('#cell-rows', '128');
    await page.fill('#cell-cols', '128');
    await page.fill('#generators', '10');
    // The rank argument needs all frequencies (the example suggests a band limit).
    await page.selectOption('#band-kind', 'none');
    await page.waitForFunction(() => !document.getElementById('fit').disabled);
    await page.click('#fit');
    await waitForFit(page);
    await screenshot(page, '12-adds-nothing');

    const captions = await page.$$eval('#gallery figcaption', (items) => items.map((c) => c.textContent));
    assert.equal(captions.length, 10);
    assert.deepEqual(captions.slice(8), ['9 · adds nothing', '10 · adds nothing']);
    const shares = captions.slice(0, 8).map((c) => Number(c.match(/· ([\d.e+-]+) %/)[1]));
    assert.ok(shares.every((s) => s > 0), captions.join(' | '));
    // The shares add up to the captured energy: 100 % minus the error at L = 8 (display rounding aside).
    const curve = await shownCurve(page);
    const captured = 100 * (1 - curve[7].relative_error);
    const total = shares.reduce((a, b) => a + b, 0);
    assert.ok(Math.abs(total - captured) < 0.1, `shares add to ${total} %, captured ${captured} %`);
    assert.ok(curve[7].relative_error < 1e-12 && curve[9].relative_error < 1e-12, 'rank 8: no error left from L = 8 on');
  } finally {
    await browser.close();
  }
});
