// trackLink: bytes to positions per axis. In process over the manual byte source (one chain for every subscriber,
// gaps into the pipeline, options checked up front), and the example of docs/live.md run as written against a
// pseudo-terminal (socat) fed by `fringetally emulate` (invented constant motion).
import { spawn, type ChildProcess } from 'node:child_process';
import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { afterEach, describe, expect, it } from 'vitest';
import { AlarmBit } from '../../src/core/index.js';
import { trackLink, type LiveReading } from '../../src/io/live/index.js';
import { createManualByteSource } from '../../src/io/serial/index.js';
import { createFrameEmulator } from '../../tools/live/frame-emulator.js';
import { requireSocat, startPtyPair, type PtyPair } from '../serial/socat.js';
import { until } from '../serial/wait.js';
import { finished, killAll, startCli } from './processes.js';

const ellipse = { offsetX: 800, offsetY: -500, amplitudeX: 12000, amplitudeY: 10800, phaseErrorRad: 0.06 };
const RATE = 100_000;
const SPF = 100;
const VELOCITY = 0.001;
const WAVELENGTH = 632.9908e-9;

function emulator(axes = 1) {
  return createFrameEmulator({
    rateHz: RATE, samplesPerFrame: SPF, axes, motion: { kind: 'constant', velocityMS: VELOCITY }, wavelengthM: WAVELENGTH, fold: 2,
    refractiveIndex: 1, ellipse, noiseRms: 0, seed: 1, includeRate: true, startSequence: 0, text: false,
    faults: { garbageEvery: 0, garbageBytes: 1, dropEvery: 0, corruptEvery: 0 },
  });
}

const axis = (name: string, fold = 2) => ({ name, wavelengthM: WAVELENGTH, fold, calibration: ellipse });

describe('trackLink over a manual source', () => {
  it('runs one pipeline per axis for every subscriber, gaps marked before the block after them', () => {
    const source = createManualByteSource();
    const live = trackLink(source, { axes: [axis('X'), axis('Y')] });
    const readings: string[] = [];
    const rows: { index: number; position: number; flags: number }[] = [];
    const positions: number[] = [];
    const subscriptions = [
      live.readings$.subscribe((reading: LiveReading) => {
        if (reading.kind === 'gap') readings.push(`gap ${reading.lostSamples} ${reading.cause} at ${reading.sampleIndex}`);
        else if (reading.kind === 'link') readings.push(`link ${reading.state}`);
        else if (reading.kind === 'samples') readings.push(`block ${reading.sampleIndex} +${reading.samplesPerFrame}`);
        if (reading.kind !== 'positions') return;
        const y = reading.summaries[1]!;
        for (let i = 0; i < y.length; i++) rows.push({ index: y.firstSampleIndex + i, position: y.output.positionM[i]!, flags: y.output.flags[i]! });
      }),
      live.axes[1]!.position$().subscribe((p) => positions.push(p.positionM)),
    ];
    expect(source.openCount).toBe(1);
    const frames = emulator(2);
    source.linkUp();
    source.write(frames.next(3).bytes);
    frames.next(2); // made, never sent: a sequence gap of 2 frames
    source.write(frames.next(1).bytes);
    source.linkDown();
    source.linkUp();
    source.write(frames.next(1).bytes);
    expect(readings).toEqual([
      'link up', 'block 0 +300', `gap ${2 * SPF} sequence at ${5 * SPF}`, `block ${5 * SPF} +${SPF}`,
      'link down', 'link up', `gap 1 link at ${6 * SPF + 1}`, `block ${6 * SPF + 1} +${SPF}`,
    ]);
    // Axis Y carries twice the motion (emulator): position v·2·i/rate at absolute index i, lost samples counted.
    const at = (index: number) => rows.find((row) => row.index === index)!;
    // To the int16 rounding of the detectors: about 1/12000 rad, 4e-12 m.
    expect(Math.abs(at(299).position - (2 * VELOCITY * 299) / RATE)).toBeLessThan(2e-11);
    expect(at(5 * SPF).flags & AlarmBit.inputGap).toBe(AlarmBit.inputGap);
    expect(at(6 * SPF + 1).flags & AlarmBit.countLost).toBe(AlarmBit.countLost);
    expect(positions.at(-1)).toBe(rows.at(-1)!.position);
    expect(live.linkStatus).toMatchObject({ gaps: 2, lostSamples: 2 * SPF + 1, samplesDelivered: 5 * SPF, linkDowns: 1, linkReturns: 1 });
    for (const subscription of subscriptions) subscription.unsubscribe();
    expect(source.openCount).toBe(0);
  });

  it('checks the axis and link options when called, and the frames against the axes at the first samples', async () => {
    const source = createManualByteSource();
    expect(() => trackLink(source, { axes: [{ ...axis('X'), fold: -1 }] })).toThrow('fold must be a positive finite number (got -1)');
    expect(() => trackLink(source, { axes: [axis('X')], link: { maxSamplesPerFrame: 0 } })).toThrow('maxSamplesPerFrame must be an integer in 1..4096 (got 0)');
    expect(() => trackLink(source, { axes: [{ ...axis('X'), bandwidthHz: 2000 }], link: { rateHz: 10_000 } })).toThrow('bandwidthHz must be');
    const live = trackLink(source, { axes: [axis('X'), axis('Y')] });
    const failure = new Promise<unknown>((resolve) => live.readings$.subscribe({ error: resolve }));
    source.write(emulator(1).next(1).bytes);
    expect(String(await failure)).toContain("block.channelCount must be at least 4 for the axes' channels (got 2)");
  });
});

const EXAMPLE_MARK = '<!-- example: track-link -->';
const ROOT = fileURLToPath(new URL('../../', import.meta.url));

/** The JavaScript block right after the marker in docs/live.md, as written. */
function docsExample(): string {
  const docs = readFileSync(join(ROOT, 'docs/live.md'), 'utf8');
  const after = docs.slice(docs.indexOf(EXAMPLE_MARK) + EXAMPLE_MARK.length);
  const match = /^\s*```js\n([\s\S]*?)\n```/.exec(after);
  if (match === null) throw new Error('docs/live.md: no ```js block after the example marker');
  return match[1]!;
}

describe('the trackLink example of docs/live.md', () => {
  const children: ChildProcess[] = [];
  let pair: PtyPair | null = null;
  let dir = '';
  afterEach(async () => {
    for (const child of children.splice(0)) if (child.exitCode === null) child.kill('SIGKILL');
    await killAll();
    await pair?.stop();
    if (dir !== '') rmSync(dir, { recursive: true, force: true });
  });

  it('prints the position, velocity and status of the emulated motion, and ends on SIGINT', async () => {
    requireSocat();
    // Inside the package, so that `fringetally/io` resolves to this build (the package's own exports).
    dir = mkdtempSync(join(ROOT, '.example-'));
    const ptys = mkdtempSync(join(tmpdir(), 'fringetally-example-'));
    pair = await startPtyPair(join(ptys, 'device'), join(ptys, 'firmware'));
    writeFileSync(join(dir, 'example.mjs'), docsExample());
    const example = spawn(process.execPath, [join(dir, 'example.mjs')], { env: { ...process.env, PORT: join(ptys, 'device') }, stdio: ['ignore', 'pipe', 'pipe'] });
    children.push(example);
    let stdout = '';
    let stderr = '';
    example.stdout!.on('data', (chunk: Buffer) => (stdout += chunk.toString()));
    example.stderr!.on('data', (chunk: Buffer) => (stderr += chunk.toString()));
    const exited = new Promise<number | null>((resolve) => example.once('close', (code) => resolve(code)));
    // Node's start-up and the package's imports can take many seconds on a loaded machine: a generous deadline.
    await until(() => stdout.includes('link up') || example.exitCode !== null, 'the example to open the port', 60_000);
    expect(stdout, stderr).toContain('link up (opened)');
    const emulate = startCli(
      ['emulate', '--port', join(ptys, 'firmware'), '--rate-hz', String(RATE), '--velocity-m-s', String(VELOCITY), '--wavelength-nm', '632.9908',
        '--fold', '2', '--duration', '1.5', '--samples-per-frame', String(SPF), '--include-rate', '--quiet'],
      ptys,
    );
    expect(await finished(emulate)).toBe(0);
    const positionLines = () => stdout.split('\n').filter((line) => line.startsWith('position '));
    await until(() => positionLines().length >= 8 || example.exitCode !== null, 'eight position updates', 60_000);
    example.kill('SIGINT');
    expect(await exited, stderr).toBe(0);
    rmSync(ptys, { recursive: true, force: true });

    // Constant motion from 0 (emulate's invented scenario): position v·i/rate at sample i. emulate's default noise
    // (20 counts RMS on a 12 000-count radius) moves a single sample's position by about 0.1 nm RMS; 1 nm is 10σ.
    const positions = positionLines().map((line) => /^position (\S+) µm at sample (\d+)$/.exec(line)!);
    expect(positions.length).toBeGreaterThanOrEqual(8);
    for (const [, micrometres, sample] of positions) {
      expect(Math.abs(Number(micrometres) * 1e-6 - (VELOCITY * Number(sample)) / RATE)).toBeLessThan(1e-9);
    }
    const velocities = stdout.split('\n').filter((line) => line.startsWith('velocity ')).map((line) => Number(/^velocity (\S+) mm\/s$/.exec(line)![1]));
    // After the velocity loop settles (its bandwidth is rate/100 by default), it reads the constant 1 mm/s.
    expect(velocities.at(-1)).toBeCloseTo(VELOCITY * 1e3, 3);
    expect(stdout).toContain('status: no alarm');
    expect(stdout).not.toMatch(/^alarm /m);
    expect(stdout).not.toContain('count lost');
  });
});
