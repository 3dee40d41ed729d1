// The live chain of `fringetally listen` (trackLink) through a real pseudo-terminal pair (socat): throughput of
// frames written as fast as the pty takes them, beside a baseline of bare serialport reads of the same bytes; and
// the latency from a frame's write (and from its arrival) to its positions leaving the pipeline, at a paced rate.
// Needs socat; the frames are an invented constant-velocity motion.

import { spawn, spawnSync, type ChildProcess } from 'node:child_process';
import { closeSync, existsSync, mkdtempSync, openSync, rmSync, writeFileSync, writeSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { createSerialByteSource, isLinkEvent } from '../../src/io/serial/index.js';
import { createFrameEmulator } from '../../tools/live/frame-emulator.js';
import { lastValueFrom } from 'rxjs';
import { trackLink, type LiveReading } from '../../src/io/live/index.js';
import type { BenchResult } from '../harness.js';

const ELLIPSE = { offsetX: 800, offsetY: -500, amplitudeX: 12000, amplitudeY: 10800, phaseErrorRad: 0.06 };
const SETTINGS = { wavelengthM: 632.9908e-9, fold: 2, refractiveIndex: 1 };

function frames(rateHz: number, samplesPerFrame: number) {
  return createFrameEmulator({
    rateHz,
    samplesPerFrame,
    axes: 1,
    motion: { kind: 'constant', velocityMS: rateHz * 1e-8 }, // 1/32 fringe per sample at fold 2
    wavelengthM: SETTINGS.wavelengthM,
    fold: SETTINGS.fold,
    refractiveIndex: 1,
    ellipse: ELLIPSE,
    noiseRms: 20,
    seed: 1,
    includeRate: true,
    startSequence: 0,
    text: false,
    faults: { garbageEvery: 0, garbageBytes: 1, dropEvery: 0, corruptEvery: 0 },
  });
}

const sleep = (ms: number) => new Promise<void>((resolve) => setTimeout(resolve, ms));

async function until(condition: () => boolean, what: string, deadlineMs = 20_000): Promise<void> {
  const start = Date.now();
  while (!condition()) {
    if (Date.now() - start > deadlineMs) throw new Error(`bench: gave up waiting for ${what}`);
    await sleep(2);
  }
}

async function ptyPair(dir: string): Promise<{ device: string; firmware: string; socat: ChildProcess }> {
  const device = join(dir, 'device');
  const firmware = join(dir, 'firmware');
  const socat = spawn('socat', [`pty,raw,echo=0,link=${device}`, `pty,raw,echo=0,link=${firmware}`], { stdio: 'ignore' });
  await until(() => existsSync(device) && existsSync(firmware), 'socat pty links');
  return { device, firmware, socat };
}

async function stopSocat(socat: ChildProcess): Promise<void> {
  if (socat.exitCode !== null || socat.signalCode !== null) return;
  const exited = new Promise<void>((resolve) => socat.once('exit', () => resolve()));
  socat.kill('SIGTERM');
  await exited;
}

function percentile(sorted: Float64Array, fraction: number): number {
  return sorted[Math.min(sorted.length - 1, Math.floor(fraction * sorted.length))]!;
}

/** `cat` writes the file into the pty (another process, so the writer does not share the reader's event loop). */
function catInto(file: string, firmware: string): ChildProcess {
  return spawn('sh', ['-c', 'cat "$0" > "$1"', file, firmware], { stdio: 'ignore' });
}

async function throughput(dir: string): Promise<BenchResult[]> {
  const rateHz = 1_000_000;
  const samplesPerFrame = 256;
  const frameCount = 16_384; // 4.2 M samples, about 17 MB
  const emulator = frames(rateHz, samplesPerFrame);
  const parts: Buffer[] = [];
  for (let made = 0; made < frameCount; made += 1024) parts.push(Buffer.from(emulator.next(1024).bytes));
  const file = join(dir, 'frames.bin');
  const bytes = Buffer.concat(parts);
  writeFileSync(file, bytes);
  const totalBytes = bytes.length;
  const totalSamples = frameCount * samplesPerFrame;
  const results: BenchResult[] = [];

  // Baseline: serialport's raw reads of the same bytes, counted and dropped.
  {
    const { device, firmware, socat } = await ptyPair(dir);
    let received = 0;
    let firstMs = 0;
    let lastMs = 0;
    let up = false;
    const subscription = createSerialByteSource({ path: device, baudRate: 921600 }).open().subscribe((event) => {
      if (isLinkEvent(event)) {
        up = event.state === 'up';
        return;
      }
      if (received === 0) firstMs = performance.now();
      received += event.length;
      lastMs = performance.now();
    });
    await until(() => up, 'link up');
    const writer = catInto(file, firmware);
    await until(() => received >= totalBytes, 'all bytes (raw)', 60_000);
    subscription.unsubscribe();
    writer.kill();
    await stopSocat(socat);
    const seconds = (lastMs - firstMs) / 1000;
    results.push({
      name: 'live/pty/baseline-raw-read/2ch/256spf',
      samplesPerSecond: totalSamples / seconds,
      nsPerSample: (seconds * 1e9) / totalSamples,
      passes: 1,
      extra: { megabytesPerSecond: totalBytes / seconds / 1e6, bytes: totalBytes },
    });
  }

  // The listen loop: decode, pipeline, one block per chunk (no file output: that is the result writer's cost).
  {
    const { device, firmware, socat } = await ptyPair(dir);
    let firstMs = 0;
    let lastMs = 0;
    let samples = 0;
    let arrivalMs = 0;
    const live = trackLink(createSerialByteSource({ path: device, baudRate: 921600 }), {
      axes: [{ ...SETTINGS, calibration: ELLIPSE }],
      link: { maxSamplesPerFrame: samplesPerFrame },
      durationS: totalSamples / rateHz,
    });
    const done = lastValueFrom(live.readings$, { defaultValue: null }).catch((error: unknown) => error);
    const counting = live.readings$.subscribe((reading: LiveReading) => {
      if (reading.kind === 'samples') arrivalMs = performance.now();
      if (reading.kind !== 'positions') return;
      if (samples === 0) firstMs = arrivalMs;
      samples += reading.summaries[0]!.length;
      lastMs = performance.now();
    });
    await until(() => live.linkStatus?.link === 'up', 'link up');
    const writer = catInto(file, firmware);
    await done;
    counting.unsubscribe();
    writer.kill();
    await stopSocat(socat);
    if (samples !== totalSamples || live.linkStatus!.gaps !== 0) {
      throw new Error(`bench: listen chain processed ${samples} of ${totalSamples} samples with ${live.linkStatus!.gaps} gaps`);
    }
    const seconds = (lastMs - firstMs) / 1000;
    results.push({
      name: 'live/pty/listen-loop/2ch/256spf',
      samplesPerSecond: totalSamples / seconds,
      nsPerSample: (seconds * 1e9) / totalSamples,
      passes: 1,
      extra: { megabytesPerSecond: totalBytes / seconds / 1e6, bytes: totalBytes },
    });
  }
  return results;
}

async function latency(dir: string): Promise<BenchResult> {
  const rateHz = 100_000;
  const samplesPerFrame = 64;
  const frameCount = 3125; // 2 s at 1562.5 frames/s
  const emulator = frames(rateHz, samplesPerFrame);
  const writtenMs = new Float64Array(frameCount);
  const fromWriteMs = new Float64Array(frameCount);
  const fromArrivalMs = new Float64Array(frameCount);
  let measured = 0;
  const { device, firmware, socat } = await ptyPair(dir);
  const live = trackLink(createSerialByteSource({ path: device, baudRate: 921600 }), {
    axes: [{ ...SETTINGS, calibration: ELLIPSE }],
    link: { maxSamplesPerFrame: samplesPerFrame },
    durationS: (frameCount * samplesPerFrame) / rateHz,
  });
  let arrivalMs = 0;
  const done = lastValueFrom(live.readings$, { defaultValue: null });
  const measuring = live.readings$.subscribe((reading: LiveReading) => {
    if (reading.kind === 'samples') arrivalMs = performance.now();
    if (reading.kind !== 'positions') return;
    const now = performance.now();
    const { firstSampleIndex, length } = reading.summaries[0]!;
    // Frames whose last sample is in this block are complete now (no losses here: index = frame × N).
    const firstFrame = Math.ceil((firstSampleIndex + 1) / samplesPerFrame) - 1;
    const endFrame = Math.floor((firstSampleIndex + length) / samplesPerFrame);
    for (let frame = Math.max(firstFrame, 0); frame < endFrame; frame++) {
      fromWriteMs[measured] = now - writtenMs[frame]!;
      fromArrivalMs[measured] = now - arrivalMs;
      measured++;
    }
  });
  await until(() => live.linkStatus?.link === 'up', 'link up');
  const fd = openSync(firmware, 'w');
  const started = performance.now();
  const framesPerMs = rateHz / samplesPerFrame / 1000;
  try {
    let sent = 0;
    while (sent < frameCount) {
      const due = Math.min(frameCount, Math.floor((performance.now() - started) * framesPerMs) + 1);
      for (; sent < due; sent++) {
        const batch = emulator.next(1);
        writtenMs[sent] = performance.now();
        writeSync(fd, batch.bytes);
      }
      await sleep(0);
    }
    await done;
  } finally {
    measuring.unsubscribe();
    closeSync(fd);
    await stopSocat(socat);
  }
  const write = fromWriteMs.subarray(0, measured).sort();
  const arrival = fromArrivalMs.subarray(0, measured).sort();
  const seconds = (performance.now() - started) / 1000;
  const us = (value: number) => Math.round(value * 1000 * 10) / 10;
  return {
    name: `live/pty/latency/${rateHz / 1000}kHz/${samplesPerFrame}spf`,
    samplesPerSecond: (frameCount * samplesPerFrame) / seconds,
    nsPerSample: (seconds * 1e9) / (frameCount * samplesPerFrame),
    passes: 1,
    extra: {
      frames: measured,
      writeToPositionP50Us: us(percentile(write, 0.5)),
      writeToPositionP90Us: us(percentile(write, 0.9)),
      writeToPositionP99Us: us(percentile(write, 0.99)),
      writeToPositionMaxUs: us(write[write.length - 1]!),
      arrivalToPositionP50Us: us(percentile(arrival, 0.5)),
      arrivalToPositionP90Us: us(percentile(arrival, 0.9)),
      arrivalToPositionP99Us: us(percentile(arrival, 0.99)),
      arrivalToPositionMaxUs: us(arrival[arrival.length - 1]!),
    },
  };
}

/** Runs the live cases; throws when socat is missing (the cases need real pseudo-terminals). */
export async function liveBenchmarks(): Promise<BenchResult[]> {
  const probe = spawnSync('socat', ['-V'], { stdio: 'ignore' });
  if (probe.error !== undefined || probe.status !== 0) throw new Error('bench: socat is missing (apt-get install -y socat)');
  const dir = mkdtempSync(join(tmpdir(), 'fringetally-bench-live-'));
  try {
    return [...(await throughput(dir)), await latency(dir)];
  } finally {
    rmSync(dir, { recursive: true, force: true });
  }
}
