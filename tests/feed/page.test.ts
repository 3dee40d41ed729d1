// The live page in headless Chromium: it connects to its own feed, draws the Lissajous figures and its
// readout follows an emulated stage motion driven from a synthetic signal (an invented scenario).
// A screenshot is kept in test-artifacts/feed-page.png.
// Check values: displacement per fringe λ/(N·n), λ = 632.9908 nm, N = 2 (CIPM 2007, published; common practice).
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { existsSync, mkdirSync } from 'node:fs';
import { chromium, type Browser } from 'playwright-core';
import { createAxes } from '../../src/stream/index.js';
import { startFeedServer, type FeedServer } from '../../src/io/feed/index.js';
import { axisOptions, METRES_PER_FRINGE } from '../stream/signal.js';
import { createMotion } from './support.js';

const CHROMIUM = '/usr/bin/chromium';

// The little of the page's DOM these checks touch: the test program is compiled without the DOM library, and
// the page's content policy forbids evaluating strings, so page-side code is written as typed functions.
interface PageElement {
  readonly textContent: string;
  getAttribute(name: string): string | null;
  readonly width?: number;
  readonly height?: number;
  getContext?(kind: '2d'): { getImageData(x: number, y: number, w: number, h: number): { data: Uint8ClampedArray } };
}
declare const document: {
  getElementById(id: string): PageElement | null;
  querySelector(selector: string): PageElement | null;
  querySelectorAll(selector: string): ArrayLike<PageElement>;
};
let browser: Browser | null = null;
let server: FeedServer | null = null;

beforeAll(async () => {
  if (!existsSync(CHROMIUM)) throw new Error(`${CHROMIUM} is missing: the page test needs Debian chromium (apt-get install -y chromium)`);
  browser = await chromium.launch({
    executablePath: CHROMIUM,
    args: ['--headless', '--no-sandbox', '--disable-gpu', '--disable-background-networking', '--disable-component-update', '--disable-sync', '--no-first-run', '--disable-quic'],
  });
});

afterAll(async () => {
  await browser?.close();
  await server?.close();
});

describe('live page', () => {
  it('connects, draws the figures and follows the motion; the alarm log records a blocked beam', async () => {
    const motion = createMotion();
    const axes = createAxes(motion.source, { axes: [{ ...axisOptions, name: 'X' }], tracePoints: 512, tracePointsPerBlock: 64 });
    server = await startFeedServer({ source: { axes, rateHz: axisOptions.rateHz }, token: 'page-test-token-0123456789' });
    const page = await browser!.newPage({ viewport: { width: 1100, height: 760 } });
    const pageErrors: string[] = [];
    page.on('pageerror', (error) => pageErrors.push(error.message));
    const offsite: string[] = [];
    page.on('request', (request) => {
      if (!request.url().startsWith(`http://127.0.0.1:${server!.port}/`) && !request.url().startsWith(`ws://127.0.0.1:${server!.port}/`)) offsite.push(request.url());
    });
    await page.goto(server.pageUrl);
    await page.waitForFunction(() => document.getElementById('link')?.getAttribute('data-state') === 'open');

    // The page subscribes at 20 Hz; keep the stage moving until the readout shows the target.
    const positionOf = () => page.evaluate(() => Number(document.querySelector('#axis-X .position')?.getAttribute('data-position-m')));
    async function moveTo(targetFringes: number) {
      const steps = 10;
      const from = motion.fringes;
      for (let k = 0; k < steps; k++) motion.move((targetFringes - from) / steps, 2000);
      for (let attempt = 0; attempt < 200; attempt++) {
        if (Math.abs((await positionOf()) / METRES_PER_FRINGE - motion.fringes) < 1e-6) return;
        motion.move(0, 500); // hold still: new blocks, same place, so updates keep coming
      }
      throw new Error(`readout never reached ${motion.fringes} fringes (shows ${(await positionOf()) / METRES_PER_FRINGE})`);
    }
    await moveTo(40);
    await moveTo(-25.5);
    const shown = await page.textContent('#axis-X .position');
    // −25.503 fringes × 316.4954 nm (the first sample is 0.003 fringe into the first move).
    expect(shown).toBe(`${((motion.fringes * METRES_PER_FRINGE) * 1e6).toFixed(3)} µm`);
    expect(await page.getAttribute('#link', 'data-state')).toBe('live');

    // Figures drawn: count plotted (coloured) pixels on each canvas.
    const inked = await page.evaluate(() =>
      ['raw', 'corrected'].map((cls) => {
        const canvas = document.querySelector(`#axis-X canvas.${cls}`)!;
        const data = canvas.getContext!('2d').getImageData(0, 0, canvas.width!, canvas.height!).data;
        let count = 0;
        for (let i = 0; i < data.length; i += 4) if (Math.abs(data[i]! - data[i + 2]!) > 60 || Math.abs(data[i + 1]! - data[i + 2]!) > 60) count++;
        return count;
      }),
    );
    expect(inked[0]).toBeGreaterThan(200);
    expect(inked[1]).toBeGreaterThan(200);

    // Block the beam: zero modulation (both detectors at their offsets) raises low_signal in the log.
    const dark = { x: new Float64Array(500).fill(axisOptions.calibration!.offsetX), y: new Float64Array(500).fill(axisOptions.calibration!.offsetY), length: 500 };
    for (let k = 0; k < 4; k++) motion.source.next(dark);
    await page.waitForFunction(() => Array.from(document.querySelectorAll('#log tr')).some((row) => row.textContent.includes('low_signal')));
    await page.waitForFunction(() => document.querySelector('#axis-X .alarms')?.textContent.includes('low_signal'));
    expect(await page.getAttribute('#axis-X .bar', 'data-low')).toBe('true');

    mkdirSync('test-artifacts', { recursive: true });
    await page.screenshot({ path: 'test-artifacts/feed-page.png', fullPage: true });
    expect(pageErrors).toEqual([]);
    expect(offsite).toEqual([]);
    await page.close();
  });
});
