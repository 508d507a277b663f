// Browser test of the Contenders page in Debian's headless Chromium: submit the subset search on
// the demo, watch its job page (progress bar and state), open the result and check that every
// criterion shown equals the job's JSON result; no console errors, CSP violations or HTTP errors.
// Screenshots go to WARDCAST_ARTIFACTS as contenders-*.png.
import { test } from 'node:test';
import assert from 'node:assert/strict';
import { withChromium, watchedPage, base, close, getJson, shot } from '../lib/harness.mjs';

withChromium();

/** A JSON criterion as a number (null stays null; "Infinity" strings become numbers). */
const num = (v) => (v === null || v === undefined ? null : Number(v));

test('the subset search runs as a job and its result page shows the engine numbers', async () => {
  const { page, problems } = await watchedPage();
  await page.goto(`${base}/analyses/larkmoor/contenders`);
  const text = await page.locator('body').innerText();
  assert.ok(text.includes('Read before deciding'), 'the cautions panel is on the page');
  assert.ok(await page.locator('input[name="candidate"][value="unemployment_pct"]').isChecked(),
    'the model\'s predictors are preselected');
  await page.check('input[name="candidate"][value="median_income"]');
  await page.check('input[name="candidate"][value="streetlight_outages_per_km"]');
  await page.fill('input[name="repeats"]', '20');
  // No screenshot here: in headless Chromium a screenshot just before the click can swallow
  // the click. The form is in the screenshot of the result page.

  await Promise.all([page.waitForURL(/\/jobs\/j\d+$/), page.click('#start-search')]);
  const job = page.url().split('/').pop();
  assert.equal(await page.locator('progress#job-progress').count(), 1, 'the job page has a progress bar');
  const state = await page.locator('.job-state').innerText();
  assert.ok(/Working|Finished/.test(state), `the state is in words: ${state}`);
  await shot(page, 'contenders-job.png');

  // The page refreshes itself while the job runs; the result link appears when it is done.
  const link = page.locator('#job-result');
  await link.waitFor({ timeout: 60000 });
  await shot(page, 'contenders-job-done.png');
  await Promise.all([page.waitForURL(`${base}/analyses/larkmoor/contenders?job=${job}`), link.click()]);
  await shot(page, 'contenders-result.png');

  const doc = await getJson(page, `${base}/api/jobs/${job}`);
  assert.equal(doc.state, 'done');
  const { selection, own_model: own } = doc.result;
  assert.equal(selection.candidates.length, 7);

  const rows = await page.$$eval('tr[data-size][data-rank]', (trs) => trs.map((tr) => {
    const value = (cls) => {
      const d = tr.querySelector(`td.${cls} data`);
      return d ? d.getAttribute('value') : undefined;
    };
    const cv = [...tr.querySelectorAll('td.c-cv data')].map((d) => Number(d.getAttribute('value')));
    return {
      size: Number(tr.dataset.size), rank: tr.dataset.rank,
      sse: value('c-sse'), r2: value('c-r2'), adj: value('c-adj'), cp: value('c-cp'),
      aic: value('c-aic'), sbc: value('c-sbc'), press: value('c-press'), cv,
    };
  }));
  const listed = selection.sizes.reduce((n, s) => n + s.models.length, 0);
  assert.ok(rows.length >= listed, 'every listed model has a row');
  const cvModels = selection.cross_validation.models;
  const sameTerms = (a, b) => a.length === b.length && [...a].sort().join('\u0000') === [...b].sort().join('\u0000');
  let compared = 0;
  for (const row of rows) {
    const model = row.rank === '—'
      ? own
      : selection.sizes.find((s) => s.size === row.size).models.find((m) => String(m.rank) === row.rank);
    assert.ok(model, `size ${row.size} place ${row.rank} is in the JSON`);
    const pairs = [['sse', model.sse], ['r2', model.r_squared], ['adj', model.adj_r_squared], ['cp', model.cp],
      ['aic', model.aic], ['sbc', model.sbc], ['press', model.press]];
    for (const [key, expected] of pairs) {
      const want = num(expected);
      if (want === null) {
        assert.equal(row[key], '', `${key} of size ${row.size} place ${row.rank} is undefined on the page too`);
      } else {
        assert.ok(close(Number(row[key]), want), `${key} of size ${row.size} place ${row.rank}: ${row[key]} vs ${want}`);
        compared += 1;
      }
    }
    const cvModel = cvModels.find((m) => sameTerms(m.terms, model.terms));
    if (cvModel) {
      assert.equal(row.cv.length, 2, `CV RMSE shown for size ${row.size} place ${row.rank}`);
      assert.ok(close(row.cv[0], cvModel.rmse.mean) && close(row.cv[1], cvModel.rmse.sd), 'CV RMSE ± sd');
      compared += 2;
    }
  }
  assert.ok(compared > 100, `many figures compared (${compared})`);
  assert.ok((await page.locator('.criterion-charts svg').count()) >= 6, 'one chart per criterion');
  const body = await page.locator('body').innerText();
  assert.ok(body.includes('P-values after a search are optimistic'));

  // A partial F-test between two listed models, chosen with the GET form.
  const options = await page.$$eval('select[name="a"] option', (os) => os.map((o) => o.value));
  const small = options.find((v) => v === 'alcohol_outlets_per_1k');
  const large = options.find((v) => v.split(',').length === 2 && v.split(',').includes('alcohol_outlets_per_1k'));
  if (small !== undefined && large !== undefined) {
    await page.selectOption('select[name="a"]', small);
    await page.selectOption('select[name="b"]', large);
    await Promise.all([page.waitForLoadState('load'), page.click('.compare-form button')]);
    await page.locator('#compare-result').waitFor();
    const shownF = Number(await page.locator('#compare-result data.c-f').getAttribute('value'));
    const api = await (await page.request.get(
      `${base}/api/analyses/larkmoor/contenders/compare?job=${job}&a=${encodeURIComponent(small)}&b=${encodeURIComponent(large)}`)).json();
    assert.ok(close(shownF, api.test.f), `F on the page equals the API: ${shownF} vs ${api.test.f}`);
    await shot(page, 'contenders-compare.png');
  }
  assert.deepEqual(problems, [], 'no console errors, CSP violations or HTTP errors');
  await page.close();
});
