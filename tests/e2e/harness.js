// Shared set-up for the end-to-end tests: the served page, headless
// Chromium through playwright-core, the command line for comparisons, and
// helpers to drive the page.
//
// `cargo xtask test` sets ORBITSPAN_URL (web/ served by xtask's server),
// ORBITSPAN_CLI (the command-line binary) and ORBITSPAN_SINGLE_FILE
// (dist/orbitspan.html). Run alone, the tests start `cargo xtask serve
// --no-build --port 0` themselves and use target/debug/orbitspan.

import { chromium } from 'playwright-core';
import assert from 'node:assert/strict';
import { execFileSync, spawn } from 'node:child_process';
import { mkdtempSync, mkdirSync, readdirSync, readFileSync, writeFileSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join, dirname, resolve } from 'node:path';
import { fileURLToPath } from 'node:url';
import { crc32 } from './png16.js';

const here = dirname(fileURLToPath(import.meta.url));
export const root = resolve(here, '..', '..');
export const outputDir = join(here, 'output');
mkdirSync(outputDir, { recursive: true });

export const CHROMIUM = '/usr/bin/chromium';
const CHROMIUM_ARGS = [
  '--headless', '--no-sandbox', '--disable-gpu', '--disable-quic', '--no-first-run',
  '--disable-background-networking', '--disable-component-update', '--disable-sync',
];

let started = null;
// The served page's address, starting a server if the runner gave none.
export async function serverUrl() {
  if (process.env.ORBITSPAN_URL) return process.env.ORBITSPAN_URL;
  if (!started) {
    started = new Promise((resolveUrl, reject) => {
      const server = spawn('cargo', ['xtask', 'serve', '--no-build', '--port', '0'], { cwd: root, stdio: ['ignore', 'pipe', 'inherit'] });
      process.on('exit', () => server.kill());
      let text = '';
      server.stdout.on('data', (data) => {
        text += data;
        const match = text.match(/http:\/\/127\.0\.0\.1:\d+\//);
        if (match) {
          // The server must not keep the test process alive once the tests are done.
          server.unref();
          server.stdout.unref?.();
          resolveUrl(match[0]);
        }
      });
      server.on('exit', (code) => reject(new Error(`cargo xtask serve exited with ${code}`)));
    });
  }
  return started;
}

export const cliPath = () => process.env.ORBITSPAN_CLI ?? join(root, 'target', 'debug', 'orbitspan');
export const singleFilePath = () => process.env.ORBITSPAN_SINGLE_FILE ?? join(root, 'dist', 'orbitspan.html');

export function tempDir(name) {
  return mkdtempSync(join(tmpdir(), `orbitspan-e2e-${name}-`));
}

// Runs the command line; returns its standard output.
export function runCli(args) {
  return execFileSync(cliPath(), args, { encoding: 'utf8', stdio: ['ignore', 'pipe', 'pipe'] });
}

let demoDir = null;
const demos = new Map();
// An example stack written by `orbitspan demo` ('woven cloth' unless named):
// its folder, files and settings.
export function demoStack(name = 'woven cloth') {
  if (!demoDir) {
    demoDir = tempDir('demo');
    runCli(['demo', '--out', demoDir]);
  }
  if (!demos.has(name)) {
    // Each stack has its own folder with a settings.json naming the stack.
    const folders = readdirSync(demoDir).map((entry) => join(demoDir, entry));
    const folder = folders.find((f) => JSON.parse(readFileSync(join(f, 'settings.json'), 'utf8')).name === name);
    if (!folder) throw new Error(`orbitspan demo wrote no '${name}' stack into ${demoDir}`);
    const info = JSON.parse(readFileSync(join(folder, 'settings.json'), 'utf8'));
    demos.set(name, { dir: folder, files: info.images.map((f) => join(folder, f)), info });
  }
  return demos.get(name);
}

// Command-line arguments for page settings (as read from the controls).
export function fitArguments(s) {
  const args = ['--group', s.group, '--cell', `${s.cell_rows}x${s.cell_cols}`, '--origin', `${s.origin[0]},${s.origin[1]}`, '--generators', String(s.generators)];
  if (s.band?.kind === 'frequencies') args.push('--band-frequencies', String(s.band.value));
  if (s.band?.kind === 'radius') args.push('--band-radius', String(s.band.value));
  if (s.lattice_coords) args.push('--lattice-coords');
  return args;
}

// The command line's report.json for files and settings.
export function cliFitReport(files, settings) {
  const dir = tempDir('cli-fit');
  const report = join(dir, 'report.json');
  runCli(['fit', ...fitArguments(settings), '--report', report, ...files]);
  return JSON.parse(readFileSync(report, 'utf8'));
}

// A fresh Chromium profile and page at 1280 x 720; every request is recorded.
export async function openBrowser({ viewport = { width: 1280, height: 720 }, colorScheme = 'light' } = {}) {
  const profile = tempDir('profile');
  const context = await chromium.launchPersistentContext(profile, {
    executablePath: CHROMIUM,
    headless: true,
    args: CHROMIUM_ARGS,
    viewport,
    colorScheme,
    acceptDownloads: true,
  });
  const requests = [];
  context.on('request', (request) => requests.push({ url: request.url(), at: Date.now() }));
  const errors = [];
  const page = context.pages()[0] ?? (await context.newPage());
  page.on('pageerror', (error) => errors.push(String(error)));
  page.on('console', (message) => {
    if (message.type() === 'error') errors.push(message.text());
  });
  return {
    context,
    page,
    requests,
    errors,
    async close() {
      await context.close();
      rmSync(profile, { recursive: true, force: true });
    },
  };
}

export async function screenshot(page, name) {
  await page.screenshot({ path: join(outputDir, `${name}.png`) });
}

// The settings the page's controls hold, in the worker's form.
export function readControls(page) {
  return page.evaluate(() => {
    const value = (id) => document.getElementById(id).value;
    const kind = value('band-kind');
    return {
      group: value('group'),
      cell_rows: Number(value('cell-rows')),
      cell_cols: Number(value('cell-cols')),
      origin: [Number(value('origin-row')), Number(value('origin-col'))],
      generators: Number(value('generators')),
      band: kind === 'none' ? null : { kind, value: Number(value('band-value')) },
      lattice_coords: document.getElementById('lattice-coords').checked,
    };
  });
}

// The error curve as shown (full precision from the values table).
export function shownCurve(page) {
  return page.$$eval('#curve-table tbody tr', (rows) => rows.map((r) => ({
    generators: Number(r.dataset.generators),
    error: Number(r.dataset.error),
    relative_error: Number(r.dataset.relativeError),
  })));
}

// The per-image error table as shown.
export function shownImageErrors(page) {
  return page.$$eval('#image-errors tbody tr', (rows) => rows.map((r) => ({
    file: r.dataset.file,
    energy: Number(r.dataset.energy),
    error: Number(r.dataset.error),
    relative_error: Number(r.dataset.relativeError),
  })));
}

// Waits until the status line says a fit finished; returns the seconds it reports.
export async function waitForFit(page, timeout = 120000) {
  await page.waitForFunction(() => /^Fitted /.test(document.getElementById('fit-status').textContent), null, { timeout });
  const text = await page.textContent('#fit-status');
  return Number(text.match(/in ([\d.]+) s/)[1]);
}

export async function useExampleAndFit(page) {
  await page.click('#use-example');
  await page.waitForFunction(() => document.querySelectorAll('#thumbs button').length > 0);
  await page.waitForFunction(() => !document.getElementById('fit').disabled);
  const settings = await readControls(page);
  await page.click('#fit');
  const seconds = await waitForFit(page);
  return { settings, seconds };
}

export function maxRelativeDifference(a, b) {
  let worst = 0;
  for (let i = 0; i < a.length; i++) {
    const scale = Math.max(Math.abs(a[i]), Math.abs(b[i]));
    if (scale > 0) worst = Math.max(worst, Math.abs(a[i] - b[i]) / scale);
  }
  return worst;
}

// True when a canvas holds at least two different pixel values.
export function canvasIsDrawn(page, selector) {
  return page.$eval(selector, (canvas) => {
    const { width, height } = canvas;
    if (!width || !height) return false;
    const data = canvas.getContext('2d').getImageData(0, 0, width, height).data;
    for (let i = 4; i < data.length; i += 4) {
      if (data[i] !== data[0] || data[i + 1] !== data[1] || data[i + 2] !== data[2] || data[i + 3] !== data[3]) return true;
    }
    return false;
  });
}

export function writeFile(dir, name, bytes) {
  const path = join(dir, name);
  writeFileSync(path, bytes);
  return path;
}

// Reads a stored (uncompressed) zip through its central directory (PKWARE APPNOTE 4.3).
export function readZip(bytes) {
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
