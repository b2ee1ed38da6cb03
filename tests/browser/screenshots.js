#!/usr/bin/env node
// The screenshots docs/site.md shows: the demo site (demos/site.json) with one
// grid row computed and playing, and the chosen cell's spectrogram, in the
// light and the dark theme, at a desktop (1280 px) and a phone (390 px) width.
// Nothing is asserted (tests/browser/*.test.js do that).
//
//   node tests/browser/screenshots.js        # writes docs/img/site-{light,dark}-{desktop,phone}.png
import { mkdirSync } from 'node:fs';
import { join } from 'node:path';
import { REPO, WORK, earshotBin, launch, mustRun, serve, waitForCheck } from './helpers.js';

const out = join(WORK, 'screenshots-site');
mustRun(earshotBin(), ['site', join(REPO, 'demos', 'site.json'), '--out', out, '--force', '--quiet']);
const img = join(REPO, 'docs', 'img');
mkdirSync(img, { recursive: true });
const server = await serve(out);
const browser = await launch();
for (const scheme of ['light', 'dark']) {
  for (const [name, viewport] of [['desktop', { width: 1280, height: 900 }], ['phone', { width: 390, height: 844 }]]) {
    const page = await browser.context.newPage();
    await page.setViewportSize(viewport);
    await page.emulateMedia({ colorScheme: scheme });
    await page.goto(server.url);
    await waitForCheck(page);
    await page.waitForFunction(() => document.body.dataset.ready === 'true');
    const cell = (k) => `#grid tbody tr:nth-child(1) td:nth-of-type(${k + 1})`;
    await page.click(cell(2));
    for (let k = 0; k < 6; k++) await page.waitForSelector(`${cell(k)}[data-state=ready]`, { timeout: 120000 });
    await page.click(cell(1));
    await page.click(cell(2));
    await page.waitForSelector('#grid-spec[data-state=drawn]', { timeout: 60000 });
    await page.waitForTimeout(600);
    const path = join(img, `site-${scheme}-${name}.png`);
    await page.locator('#panel-grid').scrollIntoViewIfNeeded();
    if (name === 'desktop') await page.screenshot({ path, fullPage: true });
    else await page.screenshot({ path }); // the screen scrolled to the grid
    await page.click(cell(2));
    await page.close();
    console.log(`wrote ${path}`);
  }
}
await browser.close();
server.stop();
