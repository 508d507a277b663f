// Browser tests of the What-if page on the demo analysis in Debian's headless Chromium: a
// one-district scenario and an allocation run through the forms, with every number shown
// compared to the JSON API, and no console errors or CSP violations. Screenshots go to
// WARDCAST_ARTIFACTS as whatif-*.png.
import { test } from 'node:test';
import assert from 'node:assert/strict';
import path from 'node:path';
import { withChromium, watchedPage, base, shots, close, getJson, dataValues, shot } from '../lib/harness.mjs';

withChromium();

const page_url = `${base}/analyses/larkmoor/what-if`;

/** A prediction document's numbers in the order the page's table shows them. */
function predictionNumbers(p) {
  return [p.fit, p.mean_interval.low, p.mean_interval.high, p.new_area_interval.low, p.new_area_interval.high];
}

test('a district with a changed indicator: the page shows the JSON API numbers', async () => {
  const { page, problems } = await watchedPage();
  await page.goto(page_url);
  await page.selectOption('#area-choice', 'LK-20');
  await Promise.all([page.waitForURL(/area=LK-20/), page.click('text=Use its values')]);
  const field = page.locator('.whatif-values input[name="x.unemployment_pct"]');
  assert.notEqual(await field.inputValue(), '', 'the district\'s value is prefilled');
  await field.fill('9.5');
  await Promise.all([page.waitForURL(/x\.unemployment_pct=9\.5/), page.click('button:has-text("Predict")')]);
  await page.locator('#one-result').scrollIntoViewIfNeeded();
  await shot(page, 'whatif-one-area.png');

  const response = await page.request.post(`${base}/api/analyses/larkmoor/what-if/predict`, {
    headers: { Origin: base, 'Content-Type': 'application/json' },
    data: { area: 'LK-20', values: { unemployment_pct: 9.5 } },
  });
  assert.equal(response.status(), 200);
  const doc = await response.json();
  assert.equal(doc.kind, 'scenario');
  const one = doc.one_area;

  const scenario = await dataValues(page, '.whatif-scenario');
  const current = await dataValues(page, '.whatif-current');
  const want = predictionNumbers(one.prediction);
  const wantNow = predictionNumbers(one.current);
  assert.equal(scenario.length, want.length);
  assert.equal(current.length, wantNow.length);
  want.forEach((v, i) => assert.ok(close(scenario[i], v), `scenario figure ${i}: ${scenario[i]} against ${v}`));
  wantNow.forEach((v, i) => assert.ok(close(current[i], v), `current figure ${i}: ${current[i]} against ${v}`));
  const diff = await dataValues(page, '.whatif-difference');
  const d = one.difference;
  [d.estimate, d.interval.low, d.interval.high]
    .forEach((v, i) => assert.ok(close(diff[i], v), `difference figure ${i}: ${diff[i]} against ${v}`));
  const leverage = await dataValues(page, '.whatif-leverage');
  assert.ok(close(leverage[0], one.extrapolation.leverage), 'leverage');
  assert.ok(close(leverage[1], one.extrapolation.max_data_leverage), 'largest leverage in the data');

  const text = await page.locator('main').innerText();
  assert.ok(text.includes('not effects of changing an'), 'the page says why these are not effects');
  assert.ok(!/\b(drives|causes|reduces)\b/i.test(text.split('Allocation scenarios')[0]), 'no causal wording about indicators');
  assert.deepEqual(problems, [], 'no console errors, failed responses or CSP violations');
  await page.close();
});

test('an allocation through the form: amounts equal the JSON and sum to the total', async () => {
  const { page, problems } = await watchedPage();
  await page.goto(page_url);
  await page.fill('#al-total', '5000000');
  await page.selectOption('#al-basis', 'blend');
  await page.fill('#al-wp', '0.5');
  await page.fill('#al-wo', '0');
  await page.fill('#al-we', '0.5');
  await page.fill('#al-floor', '30000');
  await page.fill('#al-cap', '140000');
  await page.click('.whatif-more summary');
  await page.fill('#al-draws', '500');
  await page.fill('#al-seed', '7');
  await Promise.all([page.waitForURL(/allocation=latest/), page.click('button:has-text("Run the allocation")')]);
  await page.locator('#allocation-result').scrollIntoViewIfNeeded();
  await shot(page, 'whatif-allocation.png');

  const doc = await getJson(page, `${base}/api/analyses/larkmoor/what-if/allocation`);
  assert.equal(doc.settings.total, 5000000);
  assert.equal(doc.settings.basis, 'blend');
  assert.deepEqual([doc.settings.floor, doc.settings.cap, doc.settings.seed, doc.settings.draws], [30000, 140000, 7, 500]);

  const amounts = await page.$$eval('.whatif-proposed data', (ds) => ds.map((d) => Number(d.getAttribute('value'))));
  const json = doc.districts.map((r) => r.proposed);
  assert.deepEqual(amounts, json, 'the amounts shown are the JSON amounts, in the same order');
  assert.equal(amounts.reduce((a, b) => a + b, 0), 5000000, 'they sum exactly to the total');
  const sum = await page.$eval('.whatif-sum data', (d) => Number(d.getAttribute('value')));
  assert.equal(sum, 5000000);

  // Every row's figures: residents, observed, expected, the three shares, the blend share,
  // the spread, the simulated range, the amount, this year's budget and the change.
  const rows = await page.$$eval('tr.whatif-row', (trs) => trs.map((tr) => ({
    key: tr.querySelector('th').textContent,
    values: [...tr.querySelectorAll('data')].map((d) => Number(d.getAttribute('value'))),
  })));
  assert.equal(rows.length, doc.districts.length);
  const ranges = new Map(doc.uncertainty.districts.map((u) => [u.key, u]));
  doc.districts.forEach((r, i) => {
    const u = ranges.get(r.key);
    const want = [r.residents, r.observed, r.expected, r.shares.population, r.shares.observed,
      r.shares.expected, r.shares.blend, r.share_range_pp, u.share.p2_5, u.share.p97_5, r.proposed];
    if (r.current_budget !== null) want.push(r.current_budget, r.change);
    assert.equal(rows[i].key, r.key);
    assert.equal(rows[i].values.length, want.length, `${r.key}: figures shown`);
    want.forEach((v, j) => assert.ok(close(rows[i].values[j], v), `${r.key} figure ${j}: ${rows[i].values[j]} against ${v}`));
  });

  const text = await page.locator('#allocation-result').innerText();
  assert.ok(text.includes('prevention and service funding'), 'framed as prevention and service funding');
  assert.ok(text.includes('no current budget'), 'districts without a budget row are marked');
  assert.deepEqual(problems, [], 'no console errors, failed responses or CSP violations');
  await page.close();
});

test('a scenario added to the brief: the Brief page shows its row with the same numbers', async () => {
  const { page, problems } = await watchedPage();
  await page.goto(`${page_url}?area=LK-20&x.unemployment_pct=9.5`);
  const oneText = await page.locator('#one-result').innerText();
  assert.ok(oneText.includes('below zero'), 'the negative prediction is named beside the result');
  await Promise.all([
    page.waitForURL(/#kept$/),
    page.locator('#one-result').getByRole('button', { name: 'Add to the brief' }).click(),
  ]);

  const kept = await getJson(page, `${base}/api/analyses/larkmoor/what-if/kept`);
  assert.ok(kept.length >= 1, 'the scenario is kept');
  const doc = kept[kept.length - 1];
  assert.equal(doc.one_area.area, 'LK-20');
  const want = predictionNumbers(doc.one_area.prediction);

  // The kept list on the What-if page: the last row carries the same numbers.
  const listed = await page.$$eval('tr.whatif-kept-row', (trs) =>
    [...trs[trs.length - 1].querySelectorAll('data')].map((d) => Number(d.getAttribute('value'))));
  assert.equal(listed.length, want.length);
  want.forEach((v, i) => assert.ok(close(listed[i], v), `kept figure ${i}: ${listed[i]} against ${v}`));
  await page.locator('#kept').scrollIntoViewIfNeeded();
  await page.screenshot({ path: path.join(shots, 'whatif-kept.png'), fullPage: false });

  // The Brief page: the scenario table's row for this scenario, to 1e-12.
  await page.goto(`${base}/analyses/larkmoor/brief`);
  const rows = await page.$$eval('table', (tables) => {
    const t = tables.find((x) => (x.querySelector('caption')?.textContent ?? '').startsWith('Kept what-if scenarios'));
    if (!t) return null;
    return [...t.querySelectorAll('tbody tr')].map((tr) => ({
      text: tr.textContent,
      values: [...tr.querySelectorAll('data')].map((d) => Number(d.getAttribute('value'))),
    }));
  });
  assert.ok(rows, 'the brief has a table of kept scenarios');
  assert.equal(rows.length, kept.flatMap((k) => [k.one_area, k.all_areas].filter((x) => x)).length);
  const row = rows[rows.length - 1];
  assert.ok(row.text.includes('LK-20 with unemployment 9.5 instead of'), row.text);
  assert.equal(row.values.length, want.length);
  want.forEach((v, i) => assert.ok(close(row.values[i], v), `brief figure ${i}: ${row.values[i]} against ${v}`));
  const brief = await page.locator('main').innerText();
  assert.ok(brief.includes('are predicted to have the values below'), 'non-causal wording in the brief');
  assert.ok(brief.includes('cannot go below zero'), 'the brief names the negative prediction');
  await page.locator('text=What-if scenarios').first().scrollIntoViewIfNeeded();
  await page.screenshot({ path: path.join(shots, 'whatif-kept-brief.png'), fullPage: false });
  assert.deepEqual(problems, [], 'no console errors, failed responses or CSP violations');
  await page.close();
});
