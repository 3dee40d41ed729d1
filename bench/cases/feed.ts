// The network feed under load: a real WebSocket server on loopback with 1 and 20 real clients subscribed at the
// highest rate the feed allows (1000 updates/s), fed with 4096-sample blocks of an invented scenario at
// 4.1 M samples/s. Measures the messages per second the feed sustains and the latency from a block's arrival to
// its position reaching a client (percentiles).
import { performance } from 'node:perf_hooks';
import { Subject } from 'rxjs';
import { WebSocket } from 'ws';
import type { EllipseCalibration } from '../../src/core/index.js';
import { startFeedServer } from '../../src/io/feed/index.js';
import { createAxes, type AxisBlock } from '../../src/stream/index.js';
import type { BenchResult } from '../harness.js';
import { benchSignal, BLOCK } from './core.js';

const ellipse: EllipseCalibration = { offsetX: 700, offsetY: -450, amplitudeX: 12000, amplitudeY: 10800, phaseErrorRad: 0.06 };
const BLOCK_INTERVAL_MS = 1;

function percentile(sorted: readonly number[], p: number): number {
  return sorted.length === 0 ? NaN : sorted[Math.min(sorted.length - 1, Math.floor(p * sorted.length))]!;
}

async function run(clients: number, seconds: number): Promise<BenchResult> {
  const { x, y } = benchSignal(1 << 20);
  const source = new Subject<AxisBlock>();
  const axes = createAxes(source, { axes: [{ name: 'X', rateHz: 10e6, wavelengthM: 632.9908e-9, fold: 2, calibration: ellipse }] });
  const server = await startFeedServer({ source: { axes, rateHz: 10e6 }, maxUpdateHz: 1000, defaultUpdateHz: 1000, maxClients: clients, maxClientsPerAddress: clients });
  const blockCount = Math.ceil((seconds * 1000) / BLOCK_INTERVAL_MS);
  const pushedAtMs = new Float64Array(blockCount + 1);
  const latenciesMs: number[] = [];
  let messages = 0;
  const sockets = await Promise.all(
    Array.from({ length: clients }, () =>
      new Promise<WebSocket>((resolve, reject) => {
        const socket = new WebSocket(server.feedUrl);
        socket.on('open', () => {
          socket.send(JSON.stringify({ type: 'subscribe', updateHz: 1000 }));
          resolve(socket);
        });
        socket.on('error', reject);
        socket.on('message', (data) => {
          const message = JSON.parse(String(data)) as { type: string; sampleIndex?: number };
          if (message.type !== 'update' || message.sampleIndex === undefined || message.sampleIndex < 0) return;
          messages++;
          const block = Math.floor(message.sampleIndex / BLOCK);
          if (block < blockCount) latenciesMs.push(performance.now() - pushedAtMs[block]!);
        });
      }),
    ),
  );
  const start = performance.now();
  for (let b = 0; b < blockCount; b++) {
    const at = (b * BLOCK) % ((1 << 20) - BLOCK);
    pushedAtMs[b] = performance.now();
    source.next({ x: x.subarray(at, at + BLOCK), y: y.subarray(at, at + BLOCK), length: BLOCK });
    // Pace the stream: the next block is due BLOCK_INTERVAL_MS after this one's slot.
    const due = start + (b + 1) * BLOCK_INTERVAL_MS;
    await new Promise<void>((resolve) => setTimeout(resolve, Math.max(0, due - performance.now())));
  }
  const elapsedS = (performance.now() - start) / 1000;
  await new Promise<void>((resolve) => setTimeout(resolve, 50)); // let the last updates arrive
  for (const socket of sockets) socket.close();
  source.complete();
  await server.close();
  latenciesMs.sort((a, b) => a - b);
  const samples = blockCount * BLOCK;
  return {
    name: `feed/websocket/${clients}-client${clients === 1 ? '' : 's'}`,
    samplesPerSecond: samples / elapsedS,
    nsPerSample: (elapsedS * 1e9) / samples,
    passes: 1,
    extra: {
      messagesPerSecond: messages / elapsedS,
      messagesPerSecondPerClient: messages / elapsedS / clients,
      latencyP50Ms: percentile(latenciesMs, 0.5),
      latencyP90Ms: percentile(latenciesMs, 0.9),
      latencyP99Ms: percentile(latenciesMs, 0.99),
      latencyMaxMs: latenciesMs.at(-1) ?? NaN,
    },
  };
}

export async function feedBenchmarks(options: { seconds?: number } = {}): Promise<BenchResult[]> {
  const seconds = options.seconds ?? 2;
  return [await run(1, seconds), await run(20, seconds)];
}
