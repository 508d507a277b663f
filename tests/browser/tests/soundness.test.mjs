// Browser tests of the Soundness page in headless Chromium: the numbers shown equal the checks
// document of the JSON API, the refit comparison for LK-47 equals its JSON twin, the exclusion
// form leads to a new analysis, and no page raises console errors or CSP violations.
import { test } from 'node:test';
import assert from 'node:assert/strict';
import { withChromium, watchedPage, base, close, getJson, dataValues, shot } from '../lib/harness.mjs';

withChromium();

test('the Soundness page shows the checks document of the JSON API', async () => {
  const { page, problems } = await watchedPage();
  await page.goto(`${base}/analyses/larkmoor`);
  await page.locator('nav.route a', { hasText: 'Soundness' }).click();
  await page.waitForURL(`${base}/analyses/larkmoor/soundness`);
  await shot(page, 'soundness-page.png');

  const doc = await getJson(page, `${base}/api/analyses/larkmoor/checks`);
  assert.equal(doc.kind, 'checks');

  // Shapiro-Wilk W and p beside the quantile chart.
  const sw = doc.normality.shapiro_wilk.result;
  const [w, p] = await dataValues(page, '.shapiro');
  assert.ok(close(w, sw.w), `Shapiro-Wilk W ${w} vs ${sw.w}`);
  assert.ok(close(p, sw.p_value), `Shapiro-Wilk p ${p} vs ${sw.p_value}`);

  // Every VIF, in order.
  const vifRows = await page.$$eval('table.vif tbody tr', (rows) => rows.map((r) => ({
    name: r.querySelector('th').textContent.trim(),
    vif: Number(r.querySelectorAll('data')[0].getAttribute('value')),
  })));
  const vifs = doc.collinearity.vif.result.entries;
  assert.equal(vifRows.length, vifs.length, 'one row per VIF');
  vifs.forEach((v, i) => {
    assert.equal(vifRows[i].name, v.name);
    assert.ok(close(vifRows[i].vif, v.vif), `VIF of ${v.name}`);
  });

  // The flagged areas with Cook's distance and leverage, LK-47 among them.
  const inf = doc.influence.result;
  const flagged = await page.$$eval('table.flagged tr.flag-row', (rows) => rows.map((r) => ({
    key: r.querySelector('th').textContent.trim(),
    values: [...r.querySelectorAll('data')].map((d) => Number(d.getAttribute('value'))),
  })));
  assert.deepEqual(flagged.map((f) => f.key), inf.flagged, 'the flagged areas of the document, in order');
  for (const f of flagged) {
    const row = inf.rows.find((r) => r.key === f.key);
    assert.ok(close(f.values[0], row.hat), `leverage of ${f.key}`);
    assert.ok(close(f.values[1], row.cooks_d), `Cook's distance of ${f.key}`);
    assert.ok(close(f.values[2], row.cooks_percentile * 100), `Cook's percentile of ${f.key}`);
    assert.ok(close(f.values[3], row.dffits), `DFFITS of ${f.key}`);
  }
  assert.ok(flagged.some((f) => f.key === 'LK-47'), 'LK-47 is flagged');

  // Every verdict statistic of the summary appears on the page.
  const shown = await dataValues(page, '.assumptions');
  for (const v of doc.summary) {
    if (v.check.startsWith('box_tidwell') || v.check === 'response_power') continue;
    assert.ok(shown.some((x) => close(x, v.verdict.statistic)), `the statistic of ${v.check} is shown`);
  }

  // Charts are inline SVG with a text alternative, and the cautions are on the page.
  assert.ok(await page.locator('figure.chart svg desc').count() >= 4, 'charts with descriptions');
  const text = await page.locator('body').innerText();
  for (const caution of doc.cautions) {
    assert.ok(text.includes(caution.heading), `the caution "${caution.heading}" is on the page`);
  }
  assert.deepEqual(problems, [], 'no console errors, CSP violations or HTTP errors');
  await page.close();
});

test('the refit without LK-47 equals its JSON twin', async () => {
  const { page, problems } = await watchedPage();
  await page.goto(`${base}/analyses/larkmoor/soundness`);
  await page.locator('a.refit-link[href$="key=LK-47"]').click();
  await page.waitForURL(`${base}/analyses/larkmoor/soundness/without?key=LK-47`);
  await shot(page, 'soundness-without.png');

  const doc = await getJson(page, `${base}/api/analyses/larkmoor/soundness/without?key=LK-47`);
  assert.equal(doc.kind, 'refit_without');
  assert.equal(doc.without.rows_used, doc.original.rows_used - 1);

  const rows = await page.$$eval('tr.term-row', (trs) => trs.map((r) => ({
    term: r.querySelector('th').textContent.trim(),
    values: [...r.querySelectorAll('data')].map((d) => Number(d.getAttribute('value'))),
  })));
  assert.equal(rows.length, doc.original.coefficients.length);
  doc.original.coefficients.forEach((c, i) => {
    const d = doc.without.coefficients[i];
    const v = rows[i].values;
    assert.equal(rows[i].term, c.term);
    assert.ok(close(v[0], c.estimate) && close(v[1], c.interval.low) && close(v[2], c.interval.high), `with: ${c.term}`);
    assert.ok(close(v[3], d.estimate) && close(v[4], d.interval.low) && close(v[5], d.interval.high), `without: ${c.term}`);
  });
  const stats = await dataValues(page, 'tr.stat-row');
  const wanted = [doc.original.rows_used, doc.without.rows_used, doc.original.r_squared, doc.without.r_squared,
    doc.original.adj_r_squared, doc.without.adj_r_squared, doc.original.residual_sd, doc.without.residual_sd];
  wanted.forEach((x, i) => assert.ok(close(stats[i], x), `fit statistic ${i}`));
  assert.deepEqual(problems, [], 'no console errors, CSP violations or HTTP errors');
  await page.close();
});

// This step needs the exclusion route (POST /analyses/{id}/exclude) built on the Data page's
// side; until both branches are merged the server answers 404 and this test fails. Set
// WARDCAST_SKIP_EXCLUDE=1 to skip it on a branch without that route.
test('leaving LK-47 out with a reason makes a new analysis and shows its soundness',
  { skip: process.env.WARDCAST_SKIP_EXCLUDE === '1' && 'needs the exclusion route of the set-up page' },
  async () => {
    const { page, problems } = await watchedPage();
    await page.goto(`${base}/analyses/larkmoor/soundness`);
    const row = page.locator('table.flagged tr.actions-row', { has: page.locator('input[name="key"][value="LK-47"]') });
    await row.locator('input[name="reason"]').fill('Arena district: 820 residents, rate rests on event-day visitors');
    const posted = page.waitForResponse((r) => r.request().method() === 'POST');
    await row.locator('button[type="submit"]').click();
    const answer = await posted;
    assert.equal(answer.status(), 303, `POST /analyses/larkmoor/exclude answered ${answer.status()}`);
    await page.waitForURL(/\/analyses\/[a-z0-9-]+\/soundness$/);
    assert.notEqual(new URL(page.url()).pathname, '/analyses/larkmoor/soundness', 'a new analysis');
    await shot(page, 'soundness-excluded.png');
    const id = new URL(page.url()).pathname.split('/')[2];
    const response = await page.request.get(`${base}/api/analyses/${id}/checks`);
    const doc = await response.json();
    assert.ok(doc.spec.exclusions.some((e) => e.key === 'LK-47'), 'the new spec leaves LK-47 out');
    assert.ok(!doc.influence.result.rows.some((r) => r.key === 'LK-47'), 'LK-47 is not among the rows');
    assert.deepEqual(problems, [], 'no console errors, CSP violations or HTTP errors');
    await page.close();
  });

test('the transformation search runs again as a job and its table equals the job document', async () => {
  const { page, problems } = await watchedPage();
  await page.goto(`${base}/analyses/larkmoor/soundness`);
  const form = page.locator('form#search-again');
  await form.locator('input[name="folds"]').fill('5');
  await form.locator('input[name="seed"]').fill('777');
  await form.locator('input[name="lambda_low"]').fill('-2');
  await form.locator('input[name="lambda_high"]').fill('2.5');
  await form.locator('input[name="top"]').fill('4');
  const posted = page.waitForResponse((r) => r.request().method() === 'POST');
  await form.locator('button#start-transform').click();
  const answer = await posted;
  assert.equal(answer.status(), 303, `POST answered ${answer.status()}`);
  await page.waitForURL(/\/jobs\/j[0-9]+$/);
  const job = new URL(page.url()).pathname.split('/')[2];
  assert.equal(await page.locator('progress#job-progress').count(), 1, 'the job page shows its progress');
  // The page refreshes itself until the search is done, then links to the result.
  await page.locator('a#job-result').waitFor({ timeout: 60000 });
  await page.locator('a#job-result').click();
  await page.waitForURL(`${base}/analyses/larkmoor/soundness/transform?job=${job}`);
  await shot(page, 'soundness-transform.png');

  const doc = await getJson(page, `${base}/api/jobs/${job}`);
  assert.equal(doc.state, 'done');
  const result = doc.result;
  assert.equal(result.kind, 'transformation_search');
  assert.deepEqual(result.settings, { folds: 5, seed: 777, lambda_low: -2, lambda_high: 2.5, top: 4 });
  const search = result.search.result;
  assert.equal(search.seed, 777);
  assert.equal(search.folds, 5);
  assert.equal((await page.locator('#setting-seed').innerText()).trim().split(' ')[0], '777');

  // Every candidate is a row (some folded away in the details); its numbers equal the document's.
  const rows = await page.$$eval('#search-result table.search tbody tr', (trs) => trs.map((r) => ({
    rank: Number(r.querySelector('td').textContent.trim()),
    values: [...r.querySelectorAll('data')].map((d) => d.getAttribute('value')),
  })));
  assert.equal(rows.length, search.candidates.length, 'one row per candidate');
  const num = (v) => (v === '' ? null : Number(v));
  let summaries = 0;
  for (const row of rows) {
    const c = search.candidates.find((x) => x.rank === row.rank);
    assert.ok(c, `candidate of rank ${row.rank}`);
    const rmse = num(row.values[0]);
    assert.ok(c.cv_rmse === null ? rmse === null : close(rmse, c.cv_rmse), `RMSE of ${c.label}`);
    if (c.summary) {
      summaries += 1;
      const want = [c.summary.r_squared, c.summary.shapiro_p, c.summary.breusch_pagan_p];
      want.forEach((x, i) => {
        const got = num(row.values[1 + i]);
        assert.ok(x === null ? got === null : close(got, x), `summary ${i} of ${c.label}: ${got} vs ${x}`);
      });
    } else {
      assert.equal(row.values.length, 1, `only the RMSE for ${c.label}`);
    }
  }
  assert.equal(summaries, 4, 'four candidates with a summary');
  const text = await page.locator('body').innerText();
  assert.ok(text.includes('never swaps the model'), 'the page says the model is not swapped');
  assert.equal(await page.locator('#never-swaps a[href="/analyses/larkmoor/data"]').count(), 1, 'it links the Data page');
  assert.deepEqual(problems, [], 'no console errors, CSP violations or HTTP errors');
  await page.close();
});
