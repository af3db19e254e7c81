// A settings link restores the controls; changing a control updates the link.

import { test } from 'node:test';
import assert from 'node:assert/strict';
import { openBrowser, serverUrl, readControls, screenshot } from './harness.js';

test('a settings link restores the controls and the controls write the link', async () => {
  const browser = await openBrowser();
  try {
    const { page } = browser;
    await page.goto(`${await serverUrl()}#group=pmg:ba&cell=8x12&origin=2,3&L=5&band=frequencies:40`);
    await page.waitForFunction(() => document.getElementById('group').options.length > 17);
    assert.deepEqual(await readControls(page), {
      group: 'pmg:ba',
      cell_rows: 8,
      cell_cols: 12,
      origin: [2, 3],
      generators: 5,
      band: { kind: 'frequencies', value: 40 },
      lattice_coords: false,
    });
    await screenshot(page, '08-settings-link');

    await page.fill('#generators', '7');
    await page.selectOption('#band-kind', 'radius');
    await page.fill('#band-value', '12.5');
    await page.waitForFunction(() => location.hash.includes('band=radius:12.5'));
    const hash = await page.evaluate(() => location.hash);
    assert.match(hash, /L=7/);
    assert.match(hash, /cell=8x12/);
    assert.match(hash, /group=pmg:ba/);

    // The same link in a fresh page gives the same controls.
    const second = await browser.context.newPage();
    await second.goto(await page.evaluate(() => location.href));
    await second.waitForFunction(() => document.getElementById('group').options.length > 17);
    const restored = await readControls(second);
    assert.equal(restored.generators, 7);
    assert.deepEqual(restored.band, { kind: 'radius', value: 12.5 });
  } finally {
    await browser.close();
  }
});

test('a settings link restores a typed lattice and samples, and a pixel-grid link turns them off', async () => {
  const browser = await openBrowser();
  try {
    const { page } = browser;
    await page.goto(`${await serverUrl()}#group=p6m&measure=vectors&a1=9.18,2.807&a2=-2.159,-9.354&samples=12&L=2`);
    await page.waitForFunction(() => document.getElementById('lattice-mode').value === 'vectors');
    const values = await page.evaluate(() => ['lattice-mode', 'a1-row', 'a1-col', 'a2-row', 'a2-col', 'samples', 'group', 'generators']
      .map((id) => document.getElementById(id).value));
    assert.deepEqual(values, ['vectors', '9.18', '2.807', '-2.159', '-9.354', '12', 'p6m', '2']);
    assert.ok(await page.isVisible('#lattice-vectors'));
    assert.ok(await page.isHidden('#cell-rows'), 'the pixel cell is not asked for with a typed lattice');

    await page.evaluate(() => { location.hash = '#group=p4m&cell=16x16&origin=0,0&L=3'; });
    await page.waitForFunction(() => document.getElementById('lattice-mode').value === 'pixel');
    assert.ok(await page.isVisible('#cell-rows'));
    assert.ok(await page.isHidden('#measured-lattice'));
  } finally {
    await browser.close();
  }
});
