// Browser test of the Brief page in Debian's headless Chromium: the analyst enters the
// decision question and author, sees them in the rendered brief, checks its numbers against
// the engine's JSON, and downloads the PDF; no console errors, CSP violations or HTTP errors.
import { test } from 'node:test';
import assert from 'node:assert/strict';
import fs from 'node:fs/promises';
import path from 'node:path';
import { withChromium, watchedPage, base, shots, close } from '../lib/harness.mjs';

withChromium();

test('the analyst sets the question and author, sees them in the brief, and downloads the PDF', async () => {
  const { context, page, problems } = await watchedPage();
  await page.goto(`${base}/analyses/larkmoor/brief`);
  assert.equal(await page.locator('h1').first().innerText(), 'The budgeting brief');

  const question = 'Which district conditions go with higher assault rates, for the 2027 prevention budget?';
  const author = 'R. Analyst <Budget Office>';
  await page.fill('#brief-question', question);
  await page.fill('#brief-author', author);
  await Promise.all([
    page.waitForURL(`${base}/analyses/larkmoor/brief`),
    page.click('.brief-form button[type="submit"]'),
  ]);
  await page.waitForLoadState('load');

  // The question and author are in the form and in the brief's title section.
  assert.equal(await page.inputValue('#brief-question'), question);
  assert.equal(await page.inputValue('#brief-author'), author);
  const cover = await page.locator('.brief-doc header.cover').innerText();
  assert.ok(cover.includes(question), 'the brief shows the question');
  assert.ok(cover.includes(author), 'the brief shows the author as text');
  assert.equal(await page.locator('.brief-missing').count(), 0, 'no missing-details notice any more');

  // The brief's sections, cautions and sign-off are on the page, in the order of the JSON.
  const api = await page.request.get(`${base}/api/analyses/larkmoor/brief`);
  assert.equal(api.status(), 200);
  const brief = await api.json();
  assert.equal(brief.question, question);
  assert.equal(brief.author, author);
  const text = await page.locator('.brief-doc').innerText();
  let at = -1;
  for (const s of brief.sections) {
    const found = text.indexOf(s.heading);
    assert.ok(found > at, `section "${s.heading}" in order`);
    at = found;
  }
  for (const heading of brief.cautions) {
    assert.ok(text.includes(heading), `the caution "${heading}" is in the brief`);
  }
  assert.ok(text.includes('Reviewed for data quality, method and equity'), 'the sign-off block');
  const aside = await page.locator('aside.cautions li').count();
  assert.equal(aside, 5, 'the five standing cautions beside the brief');

  // Every coefficient in the brief equals the fit JSON to 1e-12.
  const fitResponse = await page.request.get(`${base}/api/analyses/larkmoor/fit`);
  assert.equal(fitResponse.status(), 200);
  const fit = await fitResponse.json();
  const rows = await page.$$eval('.brief-doc table', (tables) => {
    const t = tables.find((x) => x.querySelector('caption')?.textContent.startsWith('Coefficients with'));
    return [...t.querySelectorAll('tbody tr')].map((tr) => ({
      term: tr.querySelector('td').textContent,
      values: [...tr.querySelectorAll('data')].map((d) => Number(d.getAttribute('value'))),
    }));
  });
  assert.equal(rows.length, fit.coefficients.length, 'one row per coefficient');
  for (const [i, c] of fit.coefficients.entries()) {
    assert.equal(rows[i].term, c.term);
    assert.ok(close(rows[i].values[0], c.estimate), `estimate of ${c.term}`);
    assert.ok(close(rows[i].values[1], c.interval.low), `interval low of ${c.term}`);
    assert.ok(close(rows[i].values[2], c.interval.high), `interval high of ${c.term}`);
    assert.ok(close(rows[i].values[3], c.std_error), `standard error of ${c.term}`);
  }
  // And the JSON tables agree with the fit too.
  const coefTable = brief.tables.find((t) => t.name === 'coefficients');
  for (const [i, c] of fit.coefficients.entries()) {
    assert.ok(close(coefTable.rows[i][1], c.estimate), `JSON estimate of ${c.term}`);
  }

  await page.screenshot({ path: path.join(shots, 'brief-page.png'), fullPage: false });
  await page.locator('.brief-doc header.cover').screenshot({ path: path.join(shots, 'brief-cover.png') });

  // The PDF download: status 200, a PDF attachment, from the link on the page.
  const pdfHref = await page.locator('.brief-download-list a', { hasText: 'Brief (PDF)' }).getAttribute('href');
  assert.equal(pdfHref, '/analyses/larkmoor/brief.pdf');
  const direct = await page.request.get(`${base}${pdfHref}`);
  assert.equal(direct.status(), 200);
  assert.equal(direct.headers()['content-type'], 'application/pdf');
  assert.equal(direct.headers()['content-disposition'], 'attachment; filename="larkmoor-brief.pdf"');
  const [download] = await Promise.all([
    page.waitForEvent('download'),
    page.click(`a[href="${pdfHref}"]`),
  ]);
  assert.equal(download.suggestedFilename(), 'larkmoor-brief.pdf');
  const saved = path.join(shots, 'brief-download.pdf');
  await download.saveAs(saved);
  const head = (await fs.readFile(saved)).subarray(0, 5).toString('latin1');
  assert.equal(head, '%PDF-', 'the download is a PDF');

  // The standalone HTML brief is self-contained: no request leaves it.
  const htmlFile = await page.request.get(`${base}/analyses/larkmoor/brief.html`);
  assert.equal(htmlFile.status(), 200);
  const standalone = await htmlFile.text();
  assert.ok(!/(src|href)="(https?:|\/)/.test(standalone), 'no external or server references');
  assert.ok(standalone.includes('R. Analyst &lt;Budget Office&gt;'), 'the author is escaped in the file');

  assert.deepEqual(problems, [], 'no console errors, CSP violations or HTTP errors');
  await context.close();
});

test('the brief page works at phone width without horizontal page scroll', async () => {
  const { context, page, problems } = await watchedPage();
  await page.setViewportSize({ width: 390, height: 844 });
  await page.goto(`${base}/analyses/larkmoor/brief`);
  const overflow = await page.evaluate(() => document.documentElement.scrollWidth - window.innerWidth);
  assert.ok(overflow <= 1, `the page scrolls sideways by ${overflow}px`);
  await page.screenshot({ path: path.join(shots, 'brief-phone.png'), fullPage: false });
  assert.deepEqual(problems, [], 'no console errors, CSP violations or HTTP errors');
  await context.close();
});
