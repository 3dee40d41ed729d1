/// <reference lib="dom" />
// The HTML report renders in headless Chromium (Debian chromium driven by playwright-core) with its plots drawn.
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createHash } from 'node:crypto';
import { existsSync, mkdirSync, mkdtempSync, rmSync, readFileSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { pathToFileURL, fileURLToPath } from 'node:url';
import { chromium, type Browser, type Page } from 'playwright-core';
import { fringetally } from './cli.js';
import { detectorOutputs, UNBALANCED_THREE, wanderingPhase } from '../support/detector-outputs.js';

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

/** A tick step is round when it is 1, 2 or 5 times a power of ten (the rule of d3-scale's ticks). */
function isRoundStep(step: number): boolean {
  const mantissa = step / 10 ** Math.floor(Math.log10(step) + 1e-9);
  return [1, 2, 5, 10].some((round) => Math.abs(mantissa - round) < 1e-6);
}

interface SeenPlot {
  label: string | null;
  outside: (string | null)[];
  x: number[];
  y: number[];
  xLog: boolean;
  yLog: boolean;
  right: number;
}

/** Every plot of the page: labels outside its frame, tick values, log axes. */
async function plotsOf(page: Page): Promise<SeenPlot[]> {
  return page.evaluate(() =>
    Array.from(document.querySelectorAll('svg.plot')).map((svg) => {
      const frame = svg.getBoundingClientRect();
      const outside = Array.from(svg.querySelectorAll('text'))
        .filter((text) => {
          const box = text.getBoundingClientRect();
          return box.left < frame.left - 0.5 || box.right > frame.right + 0.5 || box.top < frame.top - 0.5 || box.bottom > frame.bottom + 0.5;
        })
        .map((text) => text.textContent);
      const ticks = (cls: string) => Array.from(svg.querySelectorAll(`text.${cls}`)).map((text) => Number(text.textContent!.replace(/\u2212/g, '-').replace(/,/g, '')));
      const log = (cls: string) => svg.querySelector(`text.${cls}.log`) !== null;
      return { label: svg.getAttribute('aria-label'), outside, x: ticks('tick-x'), y: ticks('tick-y'), xLog: log('tick-x'), yLog: log('tick-y'), right: frame.right };
    }),
  );
}

/** Nothing clipped, nothing beyond the viewport, round evenly spaced ticks (45° steps for fringe phase). */
function expectReadablePlots(plots: SeenPlot[], viewport: number, width: number): void {
  for (const plot of plots) {
    expect(plot.outside, `${plot.label} at ${width} px`).toEqual([]);
    expect(plot.right).toBeLessThanOrEqual(viewport);
    for (const [axis, log] of [[plot.x, plot.xLog], [plot.y, plot.yLog]] as const) {
      expect(axis.every(Number.isFinite), `${plot.label}: ${axis.join(' ')}`).toBe(true);
      if (log) {
        // Logarithmic axes: labels at 1, 2 or 5 × 10^k only.
        expect(axis.length, `${plot.label}`).toBeGreaterThanOrEqual(2);
        for (const value of axis) expect(isRoundStep(value), `${plot.label}: ${axis.join(' ')}`).toBe(true);
        continue;
      }
      expect(axis.length, `${plot.label}`).toBeGreaterThanOrEqual(3);
      const steps = axis.slice(1).map((value, k) => value - axis[k]!);
      for (const step of steps) expect(Math.abs(step - steps[0]!)).toBeLessThan(1e-9 * Math.abs(steps[0]!) + 1e-12); // evenly spaced
      // Degrees of fringe phase step by 45°; everything else by 1, 2 or 5 × 10^k.
      if ((plot.label === 'periodic error against phase' || plot.label === 'radius residual against phase') && axis === plot.x) expect(steps[0]).toBe(45);
      else expect(isRoundStep(Math.abs(steps[0]!)), `${plot.label}: ${axis.join(' ')}`).toBe(true);
    }
  }
}

describe('report', () => {
  it('draws the Lissajous figures, the periodic error and the time plots with labelled alarm lanes', async () => {
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
          const box = (element as SVGGraphicsElement).getBoundingClientRect();
          return { segments: (element.getAttribute('d') ?? '').split(/[ML]/).length - 1, width: box.width, height: box.height };
        });
      return {
        plots: document.querySelectorAll('svg.plot').length,
        samples: count('path.samples'),
        before: count('path.before'),
        after: count('path.after'),
        traces: count('path.trace'),
        residual: count('path.residual'),
        spans: document.querySelectorAll('rect.span-low').length,
        lanes: Array.from(document.querySelectorAll('text.lane-label')).map((label) => label.textContent),
      };
    });
    expect(drawn.plots).toBe(8); // and the spectral density of position, the radius against phase and against time
    for (const scatter of drawn.samples) {
      expect(scatter.segments).toBeGreaterThan(500);
      expect(scatter.width).toBeGreaterThan(200); // the figure fills its plot
    }
    expect(drawn.before[0]!.segments).toBeGreaterThan(32);
    expect(drawn.after[0]!.segments).toBeGreaterThan(32);
    for (const trace of drawn.traces) expect(trace.width).toBeGreaterThan(500);
    expect(drawn.residual.length).toBe(2);
    expect(drawn.residual[0]!.segments).toBeGreaterThan(32); // 64 phase bins, nearly all covered
    expect(drawn.spans).toBeGreaterThanOrEqual(2); // the interruption, on both time plots
    expect(drawn.lanes).toContain('low_signal');
    mkdirSync(ARTIFACTS, { recursive: true });
    await page.screenshot({ path: join(ARTIFACTS, 'report.png'), fullPage: true });
    await page.close();
  });

  it('three outputs: plots the source power and the power-normalised radius, with their values', async () => {
    // A simulated three-output head (tests/support/detector-outputs.ts, invented) whose source power rises 4 % with a
    // 2 % wobble; the power plot's axis must span the simulated power relative to its mean, the radius plots must
    // show no such drift (power removed), and the text states what they could mean in nm.
    const n = 12_000;
    const phase = wanderingPhase(n, 25);
    const simulated = Float64Array.from({ length: n }, (_, i) => 1 + 0.04 * (i / n) + 0.02 * Math.sin((2 * Math.PI * 1.3 * i) / n));
    const { channels } = detectorOutputs(UNBALANCED_THREE, phase, { power: (i) => simulated[i]!, noiseRms: 2e-4 });
    writeFileSync(join(dir, 'three.csv'), ['# rate_hz: 1000', 'a,b,c', ...Array.from(phase, (_, i) => channels.map((channel) => channel[i]!.toFixed(6)).join(','))].join('\n') + '\n');
    const common = ['--wavelength-nm', '632.9908', '--fold', '2', '--quiet'];
    expect((await fringetally(['calibrate', 'three.csv', '--channels', 'a,b,c', '--out', 'three.json', ...common], dir)).code).toBe(0);
    const replayed = await fringetally(['replay', 'three.csv', '--calibration', 'three.json', '--out', 'three.out.csv', '--report', 'three.html', ...common], dir);
    expect(replayed.code, replayed.stderr).toBe(0);
    const page = await browser.newPage({ viewport: { width: 1100, height: 1800 } });
    await page.goto(pathToFileURL(join(dir, 'three.html')).href);
    const seen = await page.evaluate(() =>
      Object.fromEntries(
        Array.from(document.querySelectorAll('svg.plot')).map((svg) => [
          svg.getAttribute('aria-label'),
          {
            y: Array.from(svg.querySelectorAll('text.tick-y')).map((text) => Number(text.textContent!.replace(/\u2212/g, '-'))),
            drawn: svg.querySelectorAll('path.trace, path.residual').length,
          },
        ]),
      ),
    );
    const text = await page.evaluate(() => document.body.textContent ?? '');
    await page.close();
    const mean = simulated.reduce((a, b) => a + b, 0) / n;
    const low = Math.min(...simulated) / mean;
    const high = Math.max(...simulated) / mean;
    const power = seen['source power against time']!;
    expect(power.drawn).toBe(1);
    // The axis covers the power's range and is not much wider (nice ticks round it out by at most a step).
    expect(power.y[0]!).toBeLessThanOrEqual(low);
    expect(power.y[power.y.length - 1]!).toBeGreaterThanOrEqual(high);
    expect(power.y[power.y.length - 1]! - power.y[0]!).toBeLessThan(3 * (high - low));
    const stated = /from the three or four outputs: ([\d.]+) to ([\d.]+), mean ([\d.]+)/.exec(text);
    expect(stated).not.toBeNull();
    expect(Math.abs(Number(stated![1]) - low)).toBeLessThan(2e-3);
    expect(Math.abs(Number(stated![2]) - high)).toBeLessThan(2e-3);
    expect(Number(stated![3])).toBeCloseTo(1, 3);
    // The radius over time of the power-normalised pair: well under the 6 % the power moved.
    const radius = seen['radius against time']!;
    expect(radius.drawn).toBe(1);
    expect(Math.max(...radius.y.map(Math.abs))).toBeLessThan(0.5); // per cent
    expect(seen['radius residual against phase']!.drawn).toBe(1);
    expect(text).toMatch(/could mean up to ±\d+\.\d\d nm of periodic error/);
    expect(text).toMatch(/mean radius moved by 0\.0\d\d %/);
  });

  it('has round ticks, a header saying where it came from, and nothing clipped at 700 and 1400 px', async () => {
    expect((await fringetally(['simulate', '--out', 'long.wav', '--duration-s', '0.2', '--rate-hz', '200000', '--quiet'], dir)).code).toBe(0);
    expect((await fringetally(['calibrate', 'long.wav', '--out', 'long-cal.json', '--quiet'], dir)).code).toBe(0);
    const args = ['replay', 'long.wav', '--wavelength-nm', '632.9908', '--fold', '2', '--calibration', 'long-cal.json', '--out', 'long.csv', '--every', '100', '--report', 'long.html', '--quiet'];
    expect((await fringetally(args, dir)).code).toBe(0);
    const captureHash = createHash('sha256').update(readFileSync(join(dir, 'long.wav'))).digest('hex');
    const calibrationHash = createHash('sha256').update(readFileSync(join(dir, 'long-cal.json'))).digest('hex');
    const version = (JSON.parse(readFileSync(fileURLToPath(new URL('../../package.json', import.meta.url)), 'utf8')) as { version: string }).version;
    for (const width of [700, 1400]) {
      const page = await browser.newPage({ viewport: { width, height: 1000 } });
      await page.goto(pathToFileURL(join(dir, 'long.html')).href);
      const seen = { ...(await page.evaluate(() => ({
        header: Object.fromEntries(Array.from(document.querySelectorAll('table.header tr')).map((row) => [row.querySelector('th')!.textContent, row.querySelector('td')!.textContent])),
        scrollWidth: document.documentElement.scrollWidth,
        viewport: window.innerWidth,
      }))), plots: await plotsOf(page) };
      expect(seen.scrollWidth, `no horizontal scrolling at ${width} px`).toBeLessThanOrEqual(seen.viewport);
      expect(seen.header.date).toMatch(/^\d{4}-\d{2}-\d{2} \d{2}:\d{2}:\d{2} UTC$/); // ISO 8601, 24-hour
      expect(seen.header.tool).toBe(`fringetally ${version}`);
      expect(seen.header['command line']).toBe(`fringetally ${args.slice(0).join(' ')}`);
      expect(seen.header['capture SHA-256']).toBe(captureHash);
      expect(seen.header.calibration).toBe(`long-cal.json (sha256 ${calibrationHash})`);
      expect(seen.plots.map((plot) => plot.label)).toContain('amplitude spectral density of position');
      expectReadablePlots(seen.plots, seen.viewport, width);
      await page.screenshot({ path: join(ARTIFACTS, `report-${width}.png`), fullPage: true });
      await page.close();
    }
  });
  it('the spectrum report draws on the same charts (so does positioning): round ticks, decades, nothing clipped', async () => {
    expect((await fringetally(['simulate', '--out', 'spectrum.wav', '--duration-s', '0.02', '--quiet'], dir)).code).toBe(0);
    const spectrum = await fringetally(['spectrum', 'spectrum.wav', '--wavelength-nm', '632.9908', '--fold', '2', '--report', 'spectrum.html', '--quiet'], dir);
    expect(spectrum.code, spectrum.stderr).toBe(0);
    for (const width of [700, 1400]) {
      const page = await browser.newPage({ viewport: { width, height: 1000 } });
      await page.goto(pathToFileURL(join(dir, 'spectrum.html')).href);
      const plots = await plotsOf(page);
      const viewport = await page.evaluate(() => window.innerWidth);
      expect(plots.map((plot) => plot.label)).toEqual(['amplitude spectral density', 'cumulative RMS', 'Allan deviation']);
      expect(plots[0]).toMatchObject({ xLog: true, yLog: true });
      expectReadablePlots(plots, viewport, width);
      await page.close();
    }
  });
});
