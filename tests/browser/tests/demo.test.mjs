// Browser tests of the demo analysis in Debian's headless Chromium: the numbers a person sees
// equal the engine's JSON, the cautions are on the page, and the page raises no console
// errors or Content-Security-Policy violations. Screenshots go to WARDCAST_ARTIFACTS.
import { test } from 'node:test';
import assert from 'node:assert/strict';
import { withChromium, watchedPage, base, getJson, shot, assertEffectsMatchFit } from '../lib/harness.mjs';

withChromium();

test('the start page leads to the demo model, whose numbers equal the engine JSON', async () => {
  const { page, problems } = await watchedPage();
  await page.goto(`${base}/`);
  await shot(page, 'start.png');
  const link = page.locator('a[href="/analyses/larkmoor"]').first();
  await link.click();
  await page.waitForURL(`${base}/analyses/larkmoor`);
  await shot(page, 'effects.png');

  const fit = await getJson(page, `${base}/api/analyses/larkmoor/fit`);
  assert.equal(fit.kind, 'fit');

  await assertEffectsMatchFit(page, fit);

  const text = await page.locator('body').innerText();
  for (const caution of fit.cautions) {
    assert.ok(text.includes(caution.heading), `the caution "${caution.heading}" is on the page`);
  }
  assert.deepEqual(problems, [], 'no console errors and no CSP violations');
  await page.close();
});
