// Browser tests of the Data page in Debian's headless Chromium: change the demo model through
// the set-up form, check the new analysis' numbers against its fit JSON, leave the arena
// district out with a reason, and check one row fewer is used. No console errors, no CSP
// violations, no failed requests. Screenshots go to WARDCAST_ARTIFACTS as setup-*.png.
import { test } from 'node:test';
import assert from 'node:assert/strict';
import { withChromium, watchedPage, base, getJson, shot, assertEffectsMatchFit } from '../lib/harness.mjs';

withChromium();

/** The id of the analysis whose page is open. */
function analysisId(url) {
  const match = new URL(url).pathname.match(/^\/analyses\/([a-z0-9-]+)/);
  assert.ok(match, `an analysis page: ${url}`);
  return match[1];
}

/** The fit document of an analysis. */
const fitOf = (page, id) => getJson(page, `${base}/api/analyses/${id}/fit`);

test('changing the model on the Data page gives a new analysis whose numbers equal its fit JSON', async () => {
  const { page, problems } = await watchedPage();
  await page.goto(`${base}/analyses/larkmoor/data`);
  const text = await page.locator('main').innerText();
  for (const phrase of ['Larkmoor Office of Data', 'LK-65', 'LK-7A', 'Fit a changed model']) {
    assert.ok(text.includes(phrase), `the Data page shows ${phrase}`);
  }
  await shot(page, 'setup-data.png');
  const before = await fitOf(page, 'larkmoor');

  // Log the vacancy share and fit the changed model.
  await page.selectOption('select[name="transform.vacancy_pct"]', 'log');
  await page.fill('input[name="name"]', 'Vacancy logged in the browser');
  await Promise.all([
    page.waitForURL(/\/analyses\/vacancy-logged-in-the-browser$/),
    page.click('button:has-text("Fit the changed model")'),
  ]);
  const id = analysisId(page.url());
  await shot(page, 'setup-refit-effects.png');

  const fit = await fitOf(page, id);
  assert.ok(fit.spec.predictors.some((p) => p.column === 'vacancy_pct' && p.transform?.kind === 'log'),
    'the new spec logs the vacancy share');
  const slopes = fit.coefficients.filter((c) => c.term !== '(intercept)');
  assert.ok(slopes.some((c) => c.term === 'log(vacancy_pct)'), 'a logged term');
  await assertEffectsMatchFit(page, fit);

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
  await shot(page, 'setup-excluded-data.png');
  assert.deepEqual(problems, [], 'no console errors, CSP violations or failed requests');
  await page.close();
});
