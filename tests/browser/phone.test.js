// The page at a phone's width (390 px), in the light and the dark theme: after
// every interaction a visitor can make — choosing effects, a refused effect
// file, moving controls, a clip, a render, an out-of-date result, A/B, loudness
// match, each picture under the waveforms, playback, a refused upload, the
// grid — the page is never wider than the screen (common practice, no source:
// sideways scrolling on a phone hides content and breaks reading), and the
// console stays clean.
import { test, before, after } from 'node:test';
import assert from 'node:assert/strict';
import { buildSite, serve, launch, openPage, waitForCheck, fixture } from './helpers.js';

let built;
let server;
let browser;

before(async () => {
  built = buildSite('phone-test', {
    clips: [{ file: '../fixtures/mono-48k-i16.wav', id: 'mono', name: 'A clip with a rather long name that has to wrap on a phone' }],
    grid: {
      title: 'Compare on a phone',
      columns: [
        { name: 'Dry', input: true },
        { name: 'LSTM', effect: 'lstm' },
        { name: 'TCN with a long column name', effect: 'tcn', controls: { drive: 0.9 } },
        { name: 'TCN soft', effect: 'tcn', controls: { drive: 0.1 } },
      ],
    },
  });
  server = await serve(built.out);
  browser = await launch({ viewport: { width: 390, height: 844 } });
});

after(async () => {
  if (browser) await browser.close();
  if (server) server.stop();
});

for (const scheme of ['light', 'dark']) {
  test(`390 px, ${scheme} theme: no sideways scroll after any interaction`, async () => {
    const { page, problems } = await openPage(browser.context, 'about:blank');
    await page.emulateMedia({ colorScheme: scheme });
    await page.goto(server.url);
    const seen = [];
    const fits = async (state) => {
      const overflow = await page.evaluate(() => document.documentElement.scrollWidth - window.innerWidth);
      seen.push(state);
      assert.ok(overflow <= 0, `${state}: the page is ${overflow} px wider than the 390 px screen`);
    };
    await waitForCheck(page);
    await page.waitForFunction(() => document.body.dataset.ready === 'true');
    await fits('loaded, self-check done');
    for (const fx of built.site.effects) {
      await page.selectOption('#effect-select', `site:${fx.id}`);
      await waitForCheck(page, `site:${fx.id}`);
      await fits(`effect ${fx.id} chosen`);
    }
    await page.selectOption('#effect-select', 'site:tcn');
    await waitForCheck(page, 'site:tcn');
    await page.setInputFiles('#effect-file', fixture('corrupt.nfx'));
    await page.waitForSelector('#effect-status[data-kind=error]');
    await fits('a refused effect file');
    await page.fill('#control-0-value', '0.33');
    await page.press('#control-0-value', 'Tab');
    await page.fill('#control-1-value', '999');
    await page.press('#control-1-value', 'Tab');
    await fits('controls moved, one value refused');
    await page.$eval('#mix', (e) => { e.value = '30'; e.dispatchEvent(new Event('input')); });
    await page.check('#bypass');
    await page.uncheck('#bypass');
    await fits('mix and bypass');
    await page.click('#clip-use');
    await page.waitForSelector('#offline-source:not([hidden])');
    await fits('clip chosen');
    await page.click('#render');
    await fits('rendering');
    await page.waitForSelector('#offline-status[data-kind=ok]', { timeout: 60000 });
    await fits('rendered');
    await page.fill('#control-0-value', '0.5');
    await page.press('#control-0-value', 'Tab');
    await page.waitForSelector('#result-stale:not([hidden])');
    await fits('result out of date');
    await page.click('#rerender');
    await page.waitForSelector('#offline-status[data-kind=ok]', { timeout: 60000 });
    await page.check('#ab-original');
    await page.check('#match');
    await fits('A/B and loudness match');
    for (const view of ['difference', 'none', 'spectrograms']) {
      await page.check(`#view-${view}`);
      await fits(`view ${view}`);
    }
    await page.click('#play');
    await page.waitForTimeout(200);
    await fits('playing');
    await page.click('#play');
    await page.setInputFiles('#offline-file', fixture('notes.txt'));
    await page.click('#render');
    await page.waitForSelector('#offline-status[data-kind=error]', { timeout: 60000 });
    await fits('a refused upload');
    const cell = (k) => `#grid tbody tr:nth-child(1) td:nth-of-type(${k + 1})`;
    await page.click(cell(2));
    await fits('grid cell computing');
    for (let k = 0; k < 4; k++) await page.waitForSelector(`${cell(k)}[data-state=ready]`, { timeout: 60000 });
    await fits('grid row computed');
    await page.click(cell(3));
    await page.check('#grid-match');
    await page.check('#grid-view-none');
    await page.check('#grid-view-level');
    await fits('grid switched, loudness matched, picture shown');
    await page.click(cell(3));
    await fits('grid stopped');
    assert.equal(seen.length, 21);
    await page.close();
    assert.deepEqual(problems, []);
  });
}
