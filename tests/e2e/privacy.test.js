// No request leaves the page's origin at any time, and none at all is made
// while fitting. Every request of the browser context is recorded, the
// worker's included (its module and the wasm must show up in the record).

import { test } from 'node:test';
import assert from 'node:assert/strict';
import { openBrowser, serverUrl, waitForFit, screenshot } from './harness.js';

test('requests stay on the origin and none is made while fitting', async (t) => {
  const browser = await openBrowser();
  try {
    const { page, requests } = browser;
    const url = await serverUrl();
    const origin = new URL(url).origin;
    const response = await page.goto(url);
    const policy = response.headers()['content-security-policy'];
    assert.match(policy, /default-src 'none'/);
    assert.match(policy, /connect-src 'self'/);
    assert.match(policy, /frame-ancestors 'none'/);

    await page.click('#use-example');
    await page.waitForFunction(() => !document.getElementById('fit').disabled);
    // Let the example's pictures arrive, then fit with a longer curve.
    await page.waitForTimeout(300);
    await page.fill('#generators', '8');
    await page.waitForFunction(() => !document.getElementById('fit').disabled);
    const before = requests.length;
    const start = Date.now();
    await page.click('#fit');
    await waitForFit(page);
    const during = requests.slice(before).filter((r) => r.at >= start);
    assert.deepEqual(during.map((r) => r.url), [], 'requests made while fitting');

    // Export and save go through Blob URLs, not the network.
    await page.click('#export-open');
    const download = page.waitForEvent('download');
    await page.click('#export-download');
    await download;
    await screenshot(page, '07-export-dialog');
    await page.keyboard.press('Escape');

    const urls = requests.map((r) => r.url);
    t.diagnostic(`${urls.length} requests recorded`);
    assert.ok(urls.some((u) => u.endsWith('/worker.js')), 'the worker script is recorded');
    assert.ok(urls.some((u) => u.endsWith('/orbitspan_wasm_bg.wasm')), 'the worker\'s wasm fetch is recorded');
    const outside = urls.filter((u) => !(u.startsWith(`${origin}/`) || u.startsWith(`blob:${origin}/`)));
    assert.deepEqual(outside, [], 'requests that left the origin');
  } finally {
    await browser.close();
  }
});
