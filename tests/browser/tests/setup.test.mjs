// Browser tests of the Data page in Debian's headless Chromium: change the demo model through
// the set-up form, check the new analysis' numbers against its fit JSON, leave the arena
// district out with a reason, and check one row fewer is used. No console errors, no CSP
// violations, no failed requests. Screenshots go to WARDCAST_ARTIFACTS as setup-*.png.
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

/** A fresh page that records console errors, page errors, CSP violations and failed requests. */
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

const close = (a, b) => Math.abs(a - b) <= 1e-12 * Math.max(1, Math.abs(b));

/** The id of the analysis whose page is open. */
function analysisId(url) {
  const match = new URL(url).pathname.match(/^\/analyses\/([a-z0-9-]+)/);
  assert.ok(match, `an analysis page: ${url}`);
  return match[1];
}

async function fitOf(page, id) {
  const response = await page.request.get(`${base}/api/analyses/${id}/fit`);
  assert.equal(response.status(), 200);
  return response.json();
}

test('changing the model on the Data page gives a new analysis whose numbers equal its fit JSON', async () => {
  const { page, problems } = await watchedPage();
  await page.goto(`${base}/analyses/larkmoor/data`);
  const text = await page.locator('main').innerText();
  for (const phrase of ['Larkmoor Office of Data', 'LK-65', 'LK-7A', 'Fit a changed model']) {
    assert.ok(text.includes(phrase), `the Data page shows ${phrase}`);
  }
  await page.screenshot({ path: path.join(shots, 'setup-data.png'), fullPage: true });
  const before = await fitOf(page, 'larkmoor');

  // Log the vacancy share and fit the changed model.
  await page.selectOption('select[name="transform.vacancy_pct"]', 'log');
  await page.fill('input[name="name"]', 'Vacancy logged in the browser');
  await Promise.all([
    page.waitForURL(/\/analyses\/vacancy-logged-in-the-browser$/),
    page.click('button:has-text("Fit the changed model")'),
  ]);
  const id = analysisId(page.url());
  await page.screenshot({ path: path.join(shots, 'setup-refit-effects.png'), fullPage: true });

  const fit = await fitOf(page, id);
  assert.ok(fit.spec.predictors.some((p) => p.column === 'vacancy_pct' && p.transform?.kind === 'log'),
    'the new spec logs the vacancy share');
  const slopes = fit.coefficients.filter((c) => c.term !== '(intercept)');
  assert.ok(slopes.some((c) => c.term === 'log(vacancy_pct)'), 'a logged term');
  const shown = await page.$$eval('.effect-figures', (rows) => rows.map((r) => {
    const values = [...r.querySelectorAll('data')].map((d) => Number(d.getAttribute('value')));
    return { estimate: values[0], low: values[1], high: values[2], se: values[3] };
  }));
  assert.equal(shown.length, slopes.length, 'one effect per non-intercept coefficient');
  for (const c of slopes) {
    const row = shown.find((s) => close(s.estimate, c.estimate));
    assert.ok(row, `the page shows the estimate of ${c.term}`);
    assert.ok(close(row.low, c.interval.low) && close(row.high, c.interval.high), `interval of ${c.term}`);
    assert.ok(close(row.se, c.std_error), `standard error of ${c.term}`);
  }

  // The old analysis did not change.
  assert.deepEqual(await fitOf(page, 'larkmoor'), before, 'the demo analysis is unchanged');
  assert.deepEqual(problems, [], 'no console errors, CSP violations or failed requests');
  await page.close();
});

test('leaving the arena district out with a reason drops one row', async () => {
  const { page, problems } = await watchedPage();
  await page.goto(`${base}/analyses/larkmoor/data`);
  const before = await fitOf(page, 'larkmoor');
  const reason = 'Arena district: 820 residents, so its rate swings on a handful of incidents';

  // The Soundness page's flagged-areas form posts the same fields; here the Data page's
  // one-area form sends them.
  const form = page.locator('form[action="/analyses/larkmoor/exclude"]');
  await form.locator('input[name="key"]').fill('LK-47');
  await form.locator('input[name="reason"]').fill(reason);
  await form.locator('select[name="then"]').selectOption('effects');
  await Promise.all([
    page.waitForURL((url) => /^\/analyses\/[a-z0-9-]+$/.test(url.pathname) && !url.pathname.endsWith('/larkmoor')),
    form.locator('button[type="submit"]').click(),
  ]);
  const id = analysisId(page.url());
  const fit = await fitOf(page, id);
  assert.equal(fit.rows_used, before.rows_used - 1, 'one row fewer is used');
  assert.ok(fit.rows_dropped.some((d) => d.key === 'LK-47' && d.reason.includes(reason)), 'LK-47 is left out with its reason');

  await page.goto(`${base}/analyses/${id}/data`);
  const used = Number(await page.locator('data.rows-used').getAttribute('value'));
  assert.equal(used, fit.rows_used, 'the Data page shows the rows used');
  const text = await page.locator('main').innerText();
  assert.ok(text.includes(reason), 'the Data page lists the reason');
  await page.screenshot({ path: path.join(shots, 'setup-excluded-data.png'), fullPage: true });
  assert.deepEqual(problems, [], 'no console errors, CSP violations or failed requests');
  await page.close();
});
