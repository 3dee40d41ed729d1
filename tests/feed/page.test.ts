// The live page in headless Chromium at 1400 and 700 px and on a phone held upright (390 × 844 CSS px, touch): it connects to its own feed, its readouts follow an
// emulated stage motion driven from a synthetic signal (an invented scenario) and stay on screen, the Lissajous
// figures have round scales, the level is a number with its threshold named and a trace, times are 24-hour ISO,
// event values carry units, a raise/clear flood is one row with counts, and a normal end stays the end.
// Screenshots are kept in test-artifacts/feed-page-<width>.png.
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
  getBoundingClientRect(): { left: number; right: number; top: number; bottom: number };
  readonly width?: number;
  readonly height?: number;
  readonly scrollWidth: number;
  readonly clientWidth: number;
  getContext?(kind: '2d'): { getImageData(x: number, y: number, w: number, h: number): { data: Uint8ClampedArray } };
}
declare const window: { innerWidth: number };
declare const document: {
  readonly documentElement: { scrollWidth: number };
  readonly body: { innerText: string };
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

interface Screen {
  readonly width: number;
  readonly height: number;
  /** A phone: mobile viewport meta honoured, touch, a dense display. */
  readonly phone?: boolean;
}

/**
 * Plotted (coloured) pixels on the raw, corrected and level canvases (points are blue on the raw figure, green on
 * the corrected one and on the level trace; frames and ticks are grey, the threshold line red), or null while any
 * is at or under its `minimum`. Runs in the page, as a function (its content policy forbids evaluating strings).
 */
function inkCounts(minimum: readonly number[]): number[] | null {
  const counts = (['raw', 'corrected', 'levels'] as const).map((cls) => {
    const canvas = document.querySelector(`#axis-X canvas.${cls}`)!;
    const data = canvas.getContext!('2d').getImageData(0, 0, canvas.width!, canvas.height!).data;
    let count = 0;
    for (let i = 0; i < data.length; i += 4) {
      const [r, g, b] = [data[i]!, data[i + 1]!, data[i + 2]!];
      if (cls === 'raw' ? b > r + 60 && b > g + 20 : g > r + 40 && g > b + 20) count++;
    }
    return count;
  });
  return counts.every((count, k) => count > minimum[k]!) ? counts : null;
}

async function scenario({ width, height, phone = false }: Screen): Promise<void> {
  const motion = createMotion();
  const axes = createAxes(motion.source, { axes: [{ ...axisOptions, name: 'X' }], tracePoints: 512, tracePointsPerBlock: 64 });
  await server?.close();
  server = await startFeedServer({ source: { axes, rateHz: axisOptions.rateHz }, token: 'page-test-token-0123456789' });
  const page = await browser!.newPage({ viewport: { width, height }, ...(phone ? { isMobile: true, hasTouch: true, deviceScaleFactor: 3 } : {}) });
  const pageErrors: string[] = [];
  page.on('pageerror', (error) => pageErrors.push(error.message));
  const offsite: string[] = [];
  let sockets = 0;
  page.on('websocket', () => sockets++);
  page.on('request', (request) => {
    if (!request.url().startsWith(`http://127.0.0.1:${server!.port}/`) && !request.url().startsWith(`ws://127.0.0.1:${server!.port}/`)) offsite.push(request.url());
  });
  await page.goto(server.pageUrl);
  await page.waitForFunction(() => document.getElementById('link')?.getAttribute('data-state') === 'live');

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
  // −25.503 fringes × 316.4954 nm (the first sample is 0.003 fringe into the first move).
  expect(await page.textContent('#axis-X .position')).toBe(`${((motion.fringes * METRES_PER_FRINGE) * 1e6).toFixed(3)} µm`);
  expect(await page.getAttribute('#link', 'data-state')).toBe('live');

  // Everything fits the width: no sideways scrolling, and the readouts are on screen.
  const layout = await page.evaluate(() => ({
    scrollWidth: document.documentElement.scrollWidth,
    innerWidth: window.innerWidth,
    readouts: ['position', 'velocity', 'level', 'alarms'].map((cls) => document.querySelector(`#axis-X dd.${cls}`)!.getBoundingClientRect()),
  }));
  expect(layout.scrollWidth).toBeLessThanOrEqual(layout.innerWidth);
  for (const box of layout.readouts) {
    expect(box.left).toBeGreaterThanOrEqual(0);
    expect(box.right).toBeLessThanOrEqual(layout.innerWidth);
    expect(box.top).toBeLessThan(height);
  }

  // Figures drawn: count plotted (coloured) pixels on each canvas. The stage first turns a fringe per block for a
  // whole trace (8 blocks of 64 points), so the points spread round the ellipse: at rest, as after moveTo's waits,
  // they would all sit on one spot, and how many of the 512 did depended on how long moveTo waited.
  // Waits (and fails at its timeout) until more than 200, 200 and 100 pixels are plotted.
  for (let k = 0; k < 8; k++) motion.move(1, 500);
  await page.waitForFunction(inkCounts, [200, 200, 100]);
  // Raw points reach |offset| + amplitude = 900 + 12 000 counts: the round scale above is ±20 000 (1-2-5 steps).
  expect(await page.getAttribute('#axis-X canvas.raw', 'data-scale')).toBe('20000');
  expect(await page.textContent('#axis-X .raw-scale')).toBe('Scale ±20\u2009000 counts.');
  expect(await page.textContent('#axis-X .corrected-scale')).toBe('Scale ±1.3, ticks at 0.5.');
  // The level as a number with its threshold named (the calibrated ellipse reads 1), no percent.
  expect(await page.textContent('#axis-X dd.level')).toMatch(/^1\.000 — low-signal threshold 0\.30; lowest 1\.000$/);

  // Six overspeed bursts, each raising and clearing the alarm: one log row, with the counts.
  for (let k = 0; k < 6; k++) {
    motion.move(30, 100); // 0.3 fringe per sample: beyond the quarter-fringe limit
    motion.move(0, 1000);
  }
  await page.waitForFunction(() => Array.from(document.querySelectorAll('#log tr')).some((row) => row.textContent.includes('overspeed') && row.getAttribute('data-cleared') === '6'));
  const overspeedRows = await page.evaluate(() =>
    Array.from(document.querySelectorAll('#log tr'))
      .filter((row) => row.textContent.includes('overspeed'))
      .map((row) => ({ raised: row.getAttribute('data-raised'), text: row.textContent })),
  );
  expect(overspeedRows).toHaveLength(1);
  expect(overspeedRows[0]!.raised).toBe('6');
  expect(overspeedRows[0]!.text).toContain('×6 / ×6');
  // Value with its unit: the clearing step of a stage at rest, in rad/sample and fringe/sample.
  expect(overspeedRows[0]!.text).toMatch(/\d\.\d{3} rad\/sample \(\d\.\d{3} fringe\/sample\)/);
  // The log reads without sideways scrolling too (on a phone each row is a small card).
  const log = await page.evaluate(() => {
    const section = document.querySelector('section.log')!;
    return { scrollWidth: section.scrollWidth, clientWidth: section.clientWidth };
  });
  expect(log.scrollWidth).toBeLessThanOrEqual(log.clientWidth);

  // Block the beam: zero modulation (both detectors at their offsets) raises low_signal.
  const dark = { x: new Float64Array(500).fill(axisOptions.calibration!.offsetX), y: new Float64Array(500).fill(axisOptions.calibration!.offsetY), length: 500 };
  for (let k = 0; k < 4; k++) motion.source.next(dark);
  await page.waitForFunction(() => Array.from(document.querySelectorAll('#log tr')).some((row) => row.textContent.includes('low_signal')));
  await page.waitForFunction(() => document.querySelector('#axis-X .alarms')?.textContent.includes('low_signal'));
  expect(await page.getAttribute('#axis-X dd.level', 'data-low')).toBe('true');
  expect(await page.textContent('#axis-X dd.level')).toMatch(/^0\.000 LOW: below low-signal threshold 0\.30/);
  const lowRow = await page.evaluate(() => Array.from(document.querySelectorAll('#log tr')).find((row) => row.textContent.includes('low_signal'))!.textContent);
  expect(lowRow).toContain('0.000 (level; 1 = calibrated)');
  // Times: ISO 8601 date and 24-hour time with the zone; never AM/PM.
  const times = await page.evaluate(() => Array.from(document.querySelectorAll('#log td.log-time')).map((cell) => cell.textContent));
  for (const time of times) expect(time).toMatch(/^\d{4}-\d\d-\d\d \d\d:\d\d:\d\d\.\d{3} UTC$/);
  expect(await page.evaluate(() => document.body.innerText)).not.toMatch(/\b(AM|PM)\b/);

  mkdirSync('test-artifacts', { recursive: true });
  await page.screenshot({ path: `test-artifacts/feed-page-${width}.png`, fullPage: true });

  // A normal end is final: the page says so and does not reconnect (it retried after 0.5 s before).
  motion.source.complete();
  await page.waitForFunction(() => document.getElementById('link')?.getAttribute('data-state') === 'ended');
  await new Promise((resolve) => setTimeout(resolve, 1500));
  expect(await page.textContent('#link')).toMatch(/^measurement ended \(\d{4}-\d\d-\d\d \d\d:\d\d:\d\d\.\d{3} UTC\)$/);
  expect(sockets).toBe(1);
  expect(pageErrors).toEqual([]);
  expect(offsite).toEqual([]);
  await page.close();
}

describe('live page', () => {
  it('at 1400 px: follows the motion, scales, level, units, collapsed floods, 24-hour times, and a final end', () => scenario({ width: 1400, height: 900 }));
  it('at 700 px: the same, with every readout on screen and nothing wider than the window', () => scenario({ width: 700, height: 900 }));
  it('on a phone, 390 px upright: the same, readouts on the first screen, nothing wider than the window', () => scenario({ width: 390, height: 844, phone: true }));
});
