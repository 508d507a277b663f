// Browser test of the Tables pages in Debian's headless Chromium: upload the Larkmoor CSVs
// through the real form, confirm, join them, derive the rate, start an analysis and check
// that its Effects page shows the numbers of its JSON fit. Screenshots go to WARDCAST_ARTIFACTS.
import { test, before } from 'node:test';
import assert from 'node:assert/strict';
import path from 'node:path';
import { withChromium, watchedPage, base, demoDir, getJson, shot, assertEffectsMatchFit } from '../lib/harness.mjs';

withChromium();

before(() => {
  assert.ok(demoDir, 'WARDCAST_DEMO_DIR names the folder of the demo CSVs');
});

const predictors = ['unemployment_pct', 'youth_share_pct', 'vacancy_pct', 'alcohol_outlets_per_1k',
  'afterschool_seats_per_100'];

/** Uploads one CSV through the form on /tables and returns the new table's path. */
async function uploadTable(page, file, name, key) {
  await page.goto(`${base}/tables`);
  await page.setInputFiles('#upload-file', path.join(demoDir, file));
  await page.fill('#upload-name', name);
  if (key) await page.fill('#upload-key', key);
  await Promise.all([page.waitForURL(/\/tables\/[a-z0-9-]+$/), page.click('form.upload-form button')]);
  return new URL(page.url()).pathname;
}

/** The JSON document of a table page's path. */
const tableJson = (page, tablePath) => getJson(page, `${base}/api${tablePath}`);

test('upload, confirm, join, derive and fit from the Tables pages', async () => {
  const { page, problems } = await watchedPage();
  await page.goto(`${base}/`);
  await Promise.all([page.waitForURL(`${base}/tables`), page.click('a[href="/tables"]')]);
  await shot(page, 'tables-empty.png');

  // The district table: its report's counts equal the JSON's.
  const districts = await uploadTable(page, 'larkmoor_districts.csv', 'Larkmoor districts', 'district_code');
  let doc = await tableJson(page, districts);
  assert.equal(doc.key, 'district_code');
  assert.equal(Number(await page.getAttribute('data.table-rows', 'value')), doc.rows);
  assert.equal(Number(await page.getAttribute('data.table-columns', 'value')), doc.columns.length);
  const missing = await page.$$eval('data.column-missing', (ds) => ds.map((d) => Number(d.getAttribute('value'))));
  const reported = Object.fromEntries(doc.import.columns.map((c) => [c.column, c.missing]));
  const names = await page.$$eval('.column-name', (ns) => ns.map((n) => n.textContent));
  names.forEach((n, i) => {
    if (n !== doc.key) assert.equal(missing[i], reported[n], `missing cells of ${n}`);
  });
  await shot(page, 'tables-report.png');

  // Confirm: the page shows the version and checksum the JSON records.
  await Promise.all([page.waitForURL(`${base}${districts}`), page.click('#confirm button')]);
  doc = await tableJson(page, districts);
  assert.ok(doc.confirmed, 'the table is confirmed');
  const confirmedText = await page.locator('.confirmed').innerText();
  if (doc.confirmed.version_id) {
    assert.ok(confirmedText.includes(doc.confirmed.version_id), 'the stored version is named');
    assert.equal(await page.locator('code.checksum').innerText(), doc.confirmed.checksum);
  }

  // The budget table, joined onto the districts.
  const budgets = await uploadTable(page, 'larkmoor_budgets.csv', 'Larkmoor budgets');
  await page.goto(`${base}${districts}`);
  await page.selectOption('#join select[name="with"]', budgets.split('/').pop());
  await Promise.all([page.waitForURL((u) => u.pathname !== districts), page.click('#join button')]);
  const joined = new URL(page.url()).pathname;
  doc = await tableJson(page, joined);
  assert.equal(doc.join.kind, 'left');
  const joinText = await page.locator('.report').innerText();
  for (const key of doc.join.unmatched_right) assert.ok(joinText.includes(key), `unmatched code ${key} is named`);
  await shot(page, 'tables-joined.png');

  // Derive the rate per 10,000 residents.
  await page.fill('#derive input[name="name"]', 'assault_rate_per_10k');
  await page.selectOption('#derive select[name="kind"]', 'rate_per');
  await page.selectOption('#derive select[name="first"]', 'assaults');
  await page.selectOption('#derive select[name="second"]', 'residents');
  await page.fill('#derive input[name="per"]', '10000');
  await Promise.all([page.waitForURL(`${base}${joined}#columns`), page.click('#derive button')]);
  doc = await tableJson(page, joined);
  assert.deepEqual(doc.derived.map((d) => d.name), ['assault_rate_per_10k']);
  assert.equal(doc.derived[0].derivation.per, 10000);

  // Start an analysis with the demo's default indicators.
  await page.fill('#analyse input[name="name"]', 'Browser model');
  await page.selectOption('#analyse select[name="response"]', 'assault_rate_per_10k');
  for (const box of await page.locator('#analyse input[name="predictor"]').all()) {
    const wanted = predictors.includes(await box.getAttribute('value'));
    if ((await box.isChecked()) !== wanted) await box.setChecked(wanted);
  }
  await shot(page, 'tables-analyse.png');
  await Promise.all([page.waitForURL(/\/analyses\/browser-model(-\d+)?$/), page.click('#analyse button')]);
  const id = new URL(page.url()).pathname.split('/').pop();
  await shot(page, 'tables-effects.png');

  const fit = await getJson(page, `${base}/api/analyses/${id}/fit`);
  assert.deepEqual(fit.spec.predictors.map((p) => p.column), predictors);
  await assertEffectsMatchFit(page, fit);
  assert.deepEqual(problems, [], 'no console errors, CSP violations or HTTP errors');
  await page.close();
});
