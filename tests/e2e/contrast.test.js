// Readable contrast in light and dark (prefers-color-scheme): text against
// its background reaches 4.5:1, the WCAG 2.1 level AA ratio for normal text
// (WCAG 2.1 §1.4.3; relative luminance and contrast ratio as defined there).
// Also takes the screenshots of the fitted page in both schemes.

import { test } from 'node:test';
import assert from 'node:assert/strict';
import { openBrowser, serverUrl, useExampleAndFit, screenshot } from './harness.js';

// Pairs of (text element, element whose background it sits on).
const PAIRS = [
  ['body', 'body'],
  ['.privacy', '.topbar'],
  ['.card-summary', '.card'],
  ['.hint', '.panel'],
  ['#fit', '#fit'],
  ['.caution', '.viewer'],
  ['#image-errors td.num', '.card'],
  ['.file-detail', '.file-list li'],
];

function contrastRatios(page) {
  return page.evaluate((pairs) => {
    const rgb = (text) => {
      const parts = text.match(/[\d.]+/g).map(Number);
      if (parts.length === 4 && parts[3] < 1) throw new Error(`a see-through colour ${text}: measure against an opaque one`);
      return parts.slice(0, 3);
    };
    // WCAG 2.1 relative luminance of an sRGB colour.
    const luminance = ([r, g, b]) => {
      const channel = (v) => {
        const c = v / 255;
        return c <= 0.04045 ? c / 12.92 : ((c + 0.055) / 1.055) ** 2.4;
      };
      return 0.2126 * channel(r) + 0.7152 * channel(g) + 0.0722 * channel(b);
    };
    return pairs.map(([textSelector, backSelector]) => {
      const text = document.querySelector(textSelector);
      const back = document.querySelector(backSelector);
      const a = luminance(rgb(getComputedStyle(text).color));
      const b = luminance(rgb(getComputedStyle(back).backgroundColor));
      return { pair: `${textSelector} on ${backSelector}`, ratio: (Math.max(a, b) + 0.05) / (Math.min(a, b) + 0.05) };
    });
  }, PAIRS);
}

for (const scheme of ['light', 'dark']) {
  test(`text contrast is at least 4.5:1 in the ${scheme} scheme`, async (t) => {
    const browser = await openBrowser({ colorScheme: scheme });
    try {
      const { page } = browser;
      await page.goto(await serverUrl());
      await useExampleAndFit(page);
      await page.check('#show-cell');
      await page.hover('#pane-residual');
      await screenshot(page, `11-fitted-${scheme}`);
      const background = await page.evaluate(() => getComputedStyle(document.body).backgroundColor);
      const dark = scheme === 'dark';
      const level = background.match(/\d+/g).slice(0, 3).map(Number).reduce((a, b) => a + b, 0) / 3;
      assert.ok(dark ? level < 64 : level > 192, `${scheme} background is ${background}`);
      for (const { pair, ratio } of await contrastRatios(page)) {
        t.diagnostic(`${pair}: ${ratio.toFixed(2)}:1`);
        assert.ok(ratio >= 4.5, `${pair} has contrast ${ratio.toFixed(2)}:1`);
      }
    } finally {
      await browser.close();
    }
  });
}
