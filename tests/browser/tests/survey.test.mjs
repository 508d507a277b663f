// Browser tests of the Survey and Areas pages of the demo analysis in Debian's headless
// Chromium: every number shown equals the JSON API, a sort header reorders the table without
// script, and the pages raise no console errors, CSP violations or failed requests.
import { test } from 'node:test';
import assert from 'node:assert/strict';
import path from 'node:path';
import { withChromium, watchedPage, base, shots, close, getJson, shot } from '../lib/harness.mjs';

withChromium();

/** The number in a `<data value>` attribute; an empty value (undefined) is null. */
const valueOf = (raw) => (raw === '' ? null : Number(raw));

test('the Survey page shows the JSON summaries and correlations', async () => {
  const { page, problems } = await watchedPage();
  await page.goto(`${base}/analyses/larkmoor`);
  await page.locator('nav.route a', { hasText: 'Survey' }).click();
  await page.waitForURL(`${base}/analyses/larkmoor/survey`);
  await shot(page, 'survey-page.png');
  const doc = await getJson(page, `${base}/api/analyses/larkmoor/survey`);
  assert.equal(doc.kind, 'survey');

  const cards = await page.$$eval('article.column-card', (els) => els.map((el) => ({
    column: el.getAttribute('data-column'),
    fields: Object.fromEntries([...el.querySelectorAll('data[data-field]')]
      .map((d) => [d.getAttribute('data-field'), d.getAttribute('value')])),
    charts: el.querySelectorAll('svg').length,
  })));
  assert.equal(cards.length, doc.columns.length, 'one card per column');
  let compared = 0;
  for (const column of doc.columns) {
    const card = cards.find((c) => c.column === column.name);
    assert.ok(card, `a card for ${column.name}`);
    assert.equal(Number(card.fields.n), column.n, `${column.name}: n`);
    assert.equal(Number(card.fields.missing), column.missing, `${column.name}: missing`);
    if (column.kind !== 'numeric') continue;
    assert.equal(card.charts, 1, `${column.name}: a histogram`);
    const expected = { mean: column.mean, sd: column.sd };
    for (const q of ['min', 'q1', 'median', 'q3', 'max']) expected[`quartiles.${q}`] = column.quartiles[q];
    for (const [field, want] of Object.entries(expected)) {
      const shown = valueOf(card.fields[field]);
      assert.ok(shown !== null && close(shown, want), `${column.name}: ${field} ${shown} vs ${want}`);
      compared += 1;
    }
  }
  assert.ok(compared >= 7 * 10, 'every numeric summary was compared');

  const pairs = await page.$$eval('data[data-i]', (els) => els.map((d) => ({
    i: Number(d.getAttribute('data-i')), j: Number(d.getAttribute('data-j')), r: d.getAttribute('value'),
  })));
  const k = doc.correlation.columns.length;
  assert.equal(pairs.length, (k * (k - 1)) / 2, 'every pair is listed');
  for (const p of pairs) {
    assert.ok(close(valueOf(p.r), doc.correlation.r[p.i][p.j]), `r of pair ${p.i}, ${p.j}`);
  }

  // Choosing columns is a plain GET form.
  for (const box of await page.locator('.column-choice input[type=checkbox]').all()) await box.uncheck();
  await page.locator('.column-choice input[value="residents"]').check();
  await page.locator('.column-choice input[value="assaults"]').check();
  await page.locator('.column-choice input[value="median_income"]').check();
  await page.locator('.column-choice button[type=submit]').click();
  await page.waitForURL(/col=residents/);
  const chosen = await getJson(page, `${base}/api/analyses/larkmoor/survey?col=residents&col=assaults&col=median_income`);
  const shownPairs = await page.$$eval('data[data-i]', (els) => els.map((d) => d.getAttribute('value')));
  assert.equal(shownPairs.length, 3);
  assert.ok(close(valueOf(shownPairs[0]), chosen.correlation.r[0][1]), 'the new choice is correlated');
  await page.locator('section.survey-pairs figure').screenshot({ path: path.join(shots, 'survey-matrix.png') });
  assert.deepEqual(problems, [], 'no console errors, CSP violations or failed requests');
  await page.close();
});

test('the Areas page shows the JSON numbers and sorts by a header link', async () => {
  const { page, problems } = await watchedPage();
  await page.goto(`${base}/analyses/larkmoor/areas`);
  await shot(page, 'survey-areas.png');
  const doc = await getJson(page, `${base}/api/analyses/larkmoor/areas`);
  assert.equal(doc.kind, 'areas');

  const readRows = () => page.$$eval('table.areas-table tbody tr', (trs) => trs.map((tr) => ({
    key: tr.getAttribute('data-key'),
    flag: tr.className,
    fields: Object.fromEntries([...tr.querySelectorAll('data[data-field]')]
      .map((d) => [d.getAttribute('data-field'), d.getAttribute('value')])),
  })));
  const rows = await readRows();
  assert.equal(rows.length, doc.n, 'one row per area in the fit');
  for (const want of doc.rows) {
    const row = rows.find((r) => r.key === want.key);
    assert.ok(row, `a row for ${want.key}`);
    assert.equal(row.flag, `flag-${want.flag}`, `${want.key}: flag`);
    for (const field of ['observed', 'predicted', 'residual', 'studentized_deleted', 'leverage', 'low', 'high']) {
      const shown = valueOf(row.fields[field]);
      assert.ok(shown !== null && close(shown, want[field]), `${want.key}: ${field} ${shown} vs ${want[field]}`);
    }
  }
  const tCrit = await page.locator('#t-critical').getAttribute('value');
  assert.ok(close(Number(tCrit), doc.t_critical), 'the flag threshold');
  const text = await page.locator('main').innerText();
  assert.ok(text.includes(`${doc.flagged} of the ${doc.n} districts in the model lie outside their interval`));
  assert.ok(text.includes('fall outside by chance'));

  // Sorting is a link: residual, then the same header again for largest first.
  await page.getByRole('link', { name: 'Residual', exact: true }).click();
  await page.waitForURL(/sort=residual&dir=asc/);
  await page.getByRole('link', { name: 'Residual', exact: true }).click();
  await page.waitForURL(/sort=residual&dir=desc/);
  const sorted = await readRows();
  const residuals = sorted.map((r) => Number(r.fields.residual));
  for (let i = 1; i < residuals.length; i += 1) {
    assert.ok(residuals[i - 1] >= residuals[i], 'largest residual first');
  }
  const byJson = [...doc.rows].sort((a, b) => b.residual - a.residual || a.key.localeCompare(b.key));
  assert.deepEqual(sorted.map((r) => r.key), byJson.map((r) => r.key), 'the same order as the JSON');
  assert.equal(await page.locator('th[aria-sort="descending"]').innerText(), 'Residual');
  await shot(page, 'survey-areas-sorted.png');
  await page.locator('section.areas-chart figure').screenshot({ path: path.join(shots, 'survey-areas-chart.png') });
  assert.deepEqual(problems, [], 'no console errors, CSP violations or failed requests');
  await page.close();
});
