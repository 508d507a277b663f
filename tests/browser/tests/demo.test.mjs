// Browser tests of the demo analysis in Debian's headless Chromium: the numbers a person sees
// equal the engine's JSON, the cautions are on the page, and the page raises no console
// errors or Content-Security-Policy violations. Screenshots go to WARDCAST_ARTIFACTS.
import { test, before, after } from 'node:test';
import assert from 'node:assert/strict';
import path from 'node:path';
import { chromium } from 'playwright-core';

const base = process.env.WARDCAST_URL;
const shots = process.env.WARDCAST_ARTIFACTS;
let browser;

before(async () => {
  assert.ok(base, 'WARDCAST_URL names the running server');
  browser = await chromium.launch({
    executablePath: '/usr/bin/chromium',
    args: ['--no-sandbox', '--disable-gpu', '--disable-quic', '--no-first-run',
      '--disable-background-networking', '--disable-component-update', '--disable-sync'],
  });
});

after(async () => {
  await browser?.close();
});

/** A fresh page that records console errors, page errors and CSP violations. */
async function watchedPage() {
  const page = await browser.newPage({ viewport: { width: 1280, height: 900 } });
  const problems = [];
  page.on('console', (m) => { if (m.type() === 'error') problems.push(`console: ${m.text()}`); });
  page.on('pageerror', (e) => problems.push(`page error: ${e.message}`));
  page.on('response', (r) => { if (r.status() >= 400) problems.push(`HTTP ${r.status()} for ${r.url()}`); });
  await page.addInitScript(() => {
    document.addEventListener('securitypolicyviolation', (e) => {
      console.error(`CSP violation: ${e.violatedDirective} ${e.blockedURI}`);
    });
  });
  return { page, problems };
}

test('the start page leads to the demo model, whose numbers equal the engine JSON', async () => {
  const { page, problems } = await watchedPage();
  await page.goto(`${base}/`);
  await page.screenshot({ path: path.join(shots, 'start.png'), fullPage: true });
  const link = page.locator('a[href="/analyses/larkmoor"]').first();
  await link.click();
  await page.waitForURL(`${base}/analyses/larkmoor`);
  await page.screenshot({ path: path.join(shots, 'effects.png'), fullPage: true });

  const response = await page.request.get(`${base}/api/analyses/larkmoor/fit`);
  assert.equal(response.status(), 200);
  const fit = await response.json();
  assert.equal(fit.kind, 'fit');

  const shown = await page.$$eval('.effect-figures', (rows) => rows.map((r) => {
    const values = [...r.querySelectorAll('data')].map((d) => Number(d.getAttribute('value')));
    return { estimate: values[0], low: values[1], high: values[2], se: values[3] };
  }));
  const slopes = fit.coefficients.filter((c) => c.term !== '(intercept)');
  assert.equal(shown.length, slopes.length, 'one effect per non-intercept coefficient');
  const close = (a, b) => Math.abs(a - b) <= 1e-12 * Math.max(1, Math.abs(b));
  for (const c of slopes) {
    const row = shown.find((s) => close(s.estimate, c.estimate));
    assert.ok(row, `the page shows the estimate of ${c.term}`);
    assert.ok(close(row.low, c.interval.low) && close(row.high, c.interval.high), `interval of ${c.term}`);
    assert.ok(close(row.se, c.std_error), `standard error of ${c.term}`);
  }

  const text = await page.locator('body').innerText();
  for (const caution of fit.cautions) {
    assert.ok(text.includes(caution.heading), `the caution "${caution.heading}" is on the page`);
  }
  assert.deepEqual(problems, [], 'no console errors and no CSP violations');
  await page.close();
});
