/// <reference lib="dom" />
// The HTML report renders in headless Chromium (Debian chromium driven by playwright-core) with its plots drawn.
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { existsSync, mkdirSync, mkdtempSync, rmSync, readFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { pathToFileURL, fileURLToPath } from 'node:url';
import { chromium, type Browser } from 'playwright-core';
import { fringetally } from './cli.js';

const CHROMIUM = '/usr/bin/chromium';
const ARTIFACTS = fileURLToPath(new URL('../../test-artifacts/', import.meta.url));
let dir = '';
let browser: Browser;

beforeAll(async () => {
  if (!existsSync(CHROMIUM)) throw new Error(`${CHROMIUM} is missing: apt-get install -y chromium (the report test must not skip)`);
  dir = mkdtempSync(join(tmpdir(), 'fringetally-report-'));
  browser = await chromium.launch({
    executablePath: CHROMIUM,
    args: ['--headless', '--no-sandbox', '--disable-gpu', '--disable-background-networking', '--disable-component-update', '--disable-sync', '--no-first-run', '--disable-quic'],
  });
});
afterAll(async () => {
  await browser?.close();
  rmSync(dir, { recursive: true, force: true });
});

describe('report', () => {
  it('draws the Lissajous figures, the periodic error and the time plots with alarm spans', async () => {
    expect((await fringetally(['simulate', '--out', 'cap.wav', '--duration-s', '0.02', '--interrupt', '0.0025:0.0005', '--quiet'], dir)).code).toBe(0);
    const replayed = await fringetally(['replay', 'cap.wav', '--wavelength-nm', '632.9908', '--fold', '2', '--out', 'out.csv', '--report', 'report.html', '--quiet'], dir);
    expect(replayed.code, replayed.stderr).toBe(0);
    const html = readFileSync(join(dir, 'report.html'), 'utf8');
    expect(html).not.toMatch(/https?:\/\//); // self-contained: nothing to fetch
    const page = await browser.newPage({ viewport: { width: 1100, height: 1800 } });
    await page.goto(pathToFileURL(join(dir, 'report.html')).href);
    const drawn = await page.evaluate(() => {
      const count = (selector: string) =>
        Array.from(document.querySelectorAll(selector)).map((element) => {
          const box = (element as SVGGraphicsElement).getBBox();
          return { segments: (element.getAttribute('d') ?? '').split(/[ML]/).length - 1, width: box.width, height: box.height };
        });
      return {
        plots: document.querySelectorAll('svg.plot').length,
        samples: count('path.samples'),
        before: count('path.before'),
        after: count('path.after'),
        traces: count('path.trace'),
        spans: document.querySelectorAll('rect.span-low').length,
      };
    });
    expect(drawn.plots).toBe(5);
    for (const scatter of drawn.samples) {
      expect(scatter.segments).toBeGreaterThan(500);
      expect(scatter.width).toBeGreaterThan(200); // the figure fills its plot
    }
    expect(drawn.before[0]!.segments).toBeGreaterThan(32);
    expect(drawn.after[0]!.segments).toBeGreaterThan(32);
    for (const trace of drawn.traces) expect(trace.width).toBeGreaterThan(500);
    expect(drawn.spans).toBeGreaterThanOrEqual(2); // the interruption, on both time plots
    mkdirSync(ARTIFACTS, { recursive: true });
    await page.screenshot({ path: join(ARTIFACTS, 'report.png'), fullPage: true });
    await page.close();
  });
});
