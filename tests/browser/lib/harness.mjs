// The shared harness of the browser tests: it launches Debian's headless Chromium through
// playwright-core, opens pages that record every console error, page error, Content-Security-
// Policy violation and HTTP status of 400 or more, and holds the small helpers the tests share
// (JSON fetches, `<data value>` numbers, screenshots, close comparison of numbers).
// It lives outside tests/ so that `node --test tests/` does not run it as a test file.
import { before, after } from 'node:test';
import assert from 'node:assert/strict';
import fs from 'node:fs/promises';
import path from 'node:path';
import { chromium } from 'playwright-core';

/** The address of the running server, such as http://127.0.0.1:18787. */
export const base = process.env.WARDCAST_URL;
/** The folder that screenshots and downloads are written to. */
export const shots = process.env.WARDCAST_ARTIFACTS;
/** The folder of the demo CSV files, for the tests that upload them. */
export const demoDir = process.env.WARDCAST_DEMO_DIR;

let browser;

/**
 * Registers the hooks of one test file: before its tests, the environment is checked, the
 * screenshot folder made and Chromium launched; after them, Chromium is closed.
 */
export function withChromium() {
  before(async () => {
    assert.ok(base, 'WARDCAST_URL names the running server');
    assert.ok(shots, 'WARDCAST_ARTIFACTS names the artifacts folder');
    await fs.mkdir(shots, { recursive: true });
    browser = await chromium.launch({
      executablePath: '/usr/bin/chromium',
      args: ['--no-sandbox', '--disable-gpu', '--disable-quic', '--no-first-run',
        '--disable-background-networking', '--disable-component-update', '--disable-sync'],
    });
  });
  after(async () => {
    await browser?.close();
  });
}

/**
 * A fresh page in its own browser context that records console errors, page errors, CSP
 * violations and HTTP errors in `problems`; downloads are accepted.
 */
export async function watchedPage() {
  const context = await browser.newContext({ viewport: { width: 1280, height: 900 }, acceptDownloads: true });
  const page = await context.newPage();
  const problems = [];
  page.on('console', (m) => { if (m.type() === 'error') problems.push(`console: ${m.text()}`); });
  page.on('pageerror', (e) => problems.push(`page error: ${e.message}`));
  page.on('response', (r) => { if (r.status() >= 400) problems.push(`HTTP ${r.status()} for ${r.url()}`); });
  await page.addInitScript(() => {
    document.addEventListener('securitypolicyviolation', (e) => {
      console.error(`CSP violation: ${e.violatedDirective} ${e.blockedURI}`);
    });
  });
  return { context, page, problems };
}

/** Equal to 1e-12, relative to the larger of 1 and |b|. */
export const close = (a, b) => Math.abs(a - b) <= 1e-12 * Math.max(1, Math.abs(b));

/** Fetches a JSON document through the page's session, asserting a 200 answer. */
export async function getJson(page, url) {
  const response = await page.request.get(url);
  assert.equal(response.status(), 200, url);
  return response.json();
}

/** The numbers in the `<data value>` elements under `selector`, in document order. */
export async function dataValues(page, selector) {
  return page.$$eval(`${selector} data`, (ds) => ds.map((d) => Number(d.getAttribute('value'))));
}

/** Saves a screenshot of the whole page under `name` in the artifacts folder. */
export async function shot(page, name) {
  await page.screenshot({ path: path.join(shots, name), fullPage: true });
}

/**
 * Asserts that the Effects page open in `page` shows every non-intercept coefficient of the fit
 * document `fit`: its estimate, interval and standard error, each equal to 1e-12.
 */
export async function assertEffectsMatchFit(page, fit) {
  const shown = await page.$$eval('.effect-figures', (rows) => rows.map((r) => {
    const values = [...r.querySelectorAll('data')].map((d) => Number(d.getAttribute('value')));
    return { estimate: values[0], low: values[1], high: values[2], se: values[3] };
  }));
  const slopes = fit.coefficients.filter((c) => c.term !== '(intercept)');
  assert.equal(shown.length, slopes.length, 'one effect per non-intercept coefficient');
  for (const c of slopes) {
    const row = shown.find((s) => close(s.estimate, c.estimate));
    assert.ok(row, `the page shows the estimate of ${c.term}`);
    assert.ok(close(row.low, c.interval.low) && close(row.high, c.interval.high), `interval of ${c.term}`);
    assert.ok(close(row.se, c.std_error), `standard error of ${c.term}`);
  }
}
