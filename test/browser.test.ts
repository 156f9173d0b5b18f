/**
 * The HTML report in a real browser (Debian's Chromium, driven by playwright-core): it loads from a file:
 * URL with no console error and no request beyond the file itself, paints a non-blank page, holds its
 * charts, sorts a table on a header click, fits a phone's width, scrolls the wide score table under its fixed
 * scenario and estimator columns and hides the navigation in print.
 *
 * CI installs Chromium (.ci/run); a machine without /usr/bin/chromium skips this file with a message.
 */
import { existsSync, mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { pathToFileURL } from 'node:url';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { chromium, type BrowserContext, type Page } from 'playwright-core';
import { PNG } from 'pngjs';
import { resolvePlan } from '../src/harness/plan.js';
import { runPlan } from '../src/harness/runner.js';
import { assembleRun } from '../src/analysis/results.js';
import { renderReport } from '../src/views/report/report.js';

const CHROMIUM = '/usr/bin/chromium';
const available = existsSync(CHROMIUM);
if (!available) console.warn(`test/browser.test.ts skipped: ${CHROMIUM} is missing (CI installs it: apt-get install -y chromium)`);

describe.skipIf(!available)('the HTML report in headless Chromium', () => {
  const dir = mkdtempSync(join(tmpdir(), 'hhat-browser-'));
  const htmlPath = join(dir, 'report.html');
  const url = pathToFileURL(htmlPath).href;
  let context: BrowserContext;
  let page: Page;
  const consoleErrors: string[] = [];
  const foreignRequests: string[] = [];
  let chartCount = 0;

  beforeAll(async () => {
    const { plan } = resolvePlan({
      name: 'browser test',
      scenarios: ['normal', 'exponential'],
      estimators: ['kozachenko-leonenko', 'gaussian', 'vasicek'],
      sampleSizes: [50, 200],
      replicates: 6,
      seed: 3,
    });
    const report = await renderReport(assembleRun(await runPlan(plan, { workers: 1 }), null));
    chartCount = report.svgs.length;
    writeFileSync(htmlPath, report.html);
    context = await chromium.launchPersistentContext(join(dir, 'profile'), {
      executablePath: CHROMIUM,
      headless: true,
      viewport: { width: 1280, height: 900 },
      args: [
        '--no-sandbox',
        '--disable-gpu',
        '--disable-quic',
        '--no-first-run',
        '--disable-background-networking',
        '--disable-component-update',
        '--disable-sync',
      ],
    });
    page = context.pages()[0] ?? (await context.newPage());
    page.on('console', (message) => {
      if (message.type() === 'error') consoleErrors.push(message.text());
    });
    page.on('pageerror', (error) => consoleErrors.push(String(error)));
    context.on('request', (request) => {
      if (request.url() !== url) foreignRequests.push(request.url());
    });
    await page.goto(url, { waitUntil: 'load' });
  });

  afterAll(async () => {
    await context?.close();
    rmSync(dir, { recursive: true, force: true });
  });

  it('loads with no console error and no request other than the file itself', () => {
    expect(consoleErrors).toEqual([]);
    expect(foreignRequests).toEqual([]);
  });

  it('holds at least six charts, each an <svg> with a <title>', async () => {
    const charts = await page.locator('figure.chart > svg').count();
    expect(charts).toBeGreaterThanOrEqual(6);
    expect(charts).toBe(chartCount);
    const titles = await page.locator('figure.chart > svg > title').allTextContents();
    expect(titles).toHaveLength(charts);
    for (const title of titles) expect(title.length).toBeGreaterThan(10);
  });

  it('paints a non-blank first screen (pixel variance of the PNG decoded by pngjs)', async () => {
    const png = PNG.sync.read(await page.screenshot());
    let sum = 0;
    let sumSq = 0;
    const colours = new Set<number>();
    const pixels = png.width * png.height;
    for (let i = 0; i < pixels; i++) {
      const [r, g, b] = [png.data[4 * i], png.data[4 * i + 1], png.data[4 * i + 2]];
      const luminance = 0.2126 * r + 0.7152 * g + 0.0722 * b;
      sum += luminance;
      sumSq += luminance * luminance;
      colours.add((r << 16) | (g << 8) | b);
    }
    const variance = sumSq / pixels - (sum / pixels) ** 2;
    // A blank page has variance 0 and one colour; text and charts give hundreds of colours (anti-aliasing).
    expect(variance).toBeGreaterThan(100);
    expect(colours.size).toBeGreaterThan(50);
  });

  it('sorts a table by the clicked header, and reverses on a second click', async () => {
    const headers = (await page.locator('#scores thead th').allTextContents()).map((h) => h.replace(/[↕↑↓]/g, '').trim());
    const index = headers.indexOf('n') + 1;
    expect(index).toBeGreaterThan(0);
    const column = async () => (await page.locator(`#scores tbody tr td:nth-child(${index})`).allTextContents()).map(Number);
    const before = await column();
    expect(new Set(before).size).toBeGreaterThan(1);
    const header = page.locator('#scores thead th button', { hasText: /^n$/ });
    await header.click();
    const ascending = await column();
    expect(ascending).toEqual([...before].sort((a, b) => a - b));
    await header.click();
    expect(await column()).toEqual([...before].sort((a, b) => b - a));
  });

  it('fits a 390-pixel phone screen without sideways page scrolling', async () => {
    await page.setViewportSize({ width: 390, height: 800 });
    // Evaluated as text in the page: this file is type-checked without the DOM library.
    const scrollWidth = await page.evaluate<number>('document.documentElement.scrollWidth');
    expect(scrollWidth).toBeLessThanOrEqual(390);
    await page.setViewportSize({ width: 1280, height: 900 });
  });

  it('scrolls the "All scores" table sideways inside its box, the scenario and estimator columns staying in place', async () => {
    await page.setViewportSize({ width: 700, height: 800 });
    // Evaluated as text in the page: this file is type-checked without the DOM library.
    const layout = await page.evaluate<{
      overflowX: string;
      positions: string[];
      scrollable: number;
      before: number[];
      after: number[];
      scrolled: number;
    }>(`(() => {
      const wrap = document.querySelector('#scores .table-wrap');
      const row = wrap.querySelector('tbody tr');
      const lefts = () => Array.from(row.cells).slice(0, 3).map((c) => c.getBoundingClientRect().left - wrap.getBoundingClientRect().left);
      const before = lefts();
      wrap.scrollLeft = 300;
      const after = lefts();
      const result = {
        overflowX: getComputedStyle(wrap).overflowX,
        positions: Array.from(row.cells).slice(0, 3).map((c) => getComputedStyle(c).position),
        scrollable: wrap.scrollWidth - wrap.clientWidth,
        before,
        after,
        scrolled: wrap.scrollLeft,
      };
      wrap.scrollLeft = 0;
      return result;
    })()`);
    expect(layout.overflowX).toBe('auto');
    expect(layout.positions).toEqual(['sticky', 'sticky', 'static']);
    // The table is wider than its box at this width, so it scrolls (and the page does not).
    expect(layout.scrollable).toBeGreaterThan(300);
    expect(layout.scrolled).toBe(300);
    // Scenario and estimator stay where they were, side by side; the third column (n) moved left by the scroll.
    expect(layout.after.slice(0, 2)).toEqual(layout.before.slice(0, 2));
    expect(layout.before[1]).toBeGreaterThan(layout.before[0]);
    expect(layout.after[2]).toBeCloseTo(layout.before[2] - 300, 0);
    const pageWidth = await page.evaluate<number>('document.documentElement.scrollWidth');
    expect(pageWidth).toBeLessThanOrEqual(700);
    await page.setViewportSize({ width: 1280, height: 900 });
  });

  it('hides the contents list when printed', async () => {
    await page.emulateMedia({ media: 'print' });
    expect(await page.locator('nav').isHidden()).toBe(true);
    await page.emulateMedia({ media: 'screen' });
    expect(await page.locator('nav').isVisible()).toBe(true);
  });
});
