// Helpers for the feed tests: an invented stage motion pushed as blocks, and a WebSocket client that
// queues messages so tests can wait for one that matches (conditions, never timings).
import { Subject } from 'rxjs';
import WebSocket from 'ws';
import type { AxisBlock } from '../../src/stream/index.js';
import { quadrature } from '../stream/signal.js';

/** A stage that moves by a given number of fringes at a time; each move goes out as blocks of 500 samples. */
export function createMotion() {
  const source = new Subject<AxisBlock>();
  let phaseRad = 0;
  let samples = 0;
  let originRad = Number.NaN; // phase of the first sample: the pipeline's zero of position
  return {
    source,
    get sampleCount() {
      return samples;
    },
    /** Position of the last sample in fringes, relative to the first sample. */
    get fringes() {
      return Number.isNaN(originRad) ? 0 : (phaseRad - originRad) / (2 * Math.PI);
    },
    /** Moves `fringes` fringes over `count` samples (a fringe per 200 samples or slower keeps the count exact). */
    move(fringes: number, count = 1000) {
      const phase = new Float64Array(count);
      for (let i = 0; i < count; i++) phase[i] = phaseRad + (2 * Math.PI * fringes * (i + 1)) / count;
      if (Number.isNaN(originRad)) originRad = phase[0]!;
      phaseRad = phase[count - 1]!;
      const { x, y } = quadrature(phase);
      for (let at = 0; at < count; at += 500) {
        const end = Math.min(count, at + 500);
        source.next({ x: x.subarray(at, end), y: y.subarray(at, end), length: end - at });
      }
      samples += count;
    },
  };
}

export interface TestClient {
  readonly socket: WebSocket;
  /** Resolves with the first queued or future message that satisfies `match` (messages before it are dropped). */
  next<T = Record<string, unknown>>(match: (message: Record<string, unknown>) => boolean, what: string): Promise<T>;
  send(value: unknown): void;
  closed: Promise<{ code: number; reason: string }>;
}

/** `autoPong: false` makes a client that never answers pings, as a dead peer would not. */
export function openClient(url: string, headers: Record<string, string> = {}, options: { autoPong?: boolean } = {}): Promise<TestClient> {
  return new Promise((resolve, reject) => {
    const socket = new WebSocket(url, { headers, ...options });
    const queue: Record<string, unknown>[] = [];
    let waiter: (() => void) | null = null;
    const closed = new Promise<{ code: number; reason: string }>((done) =>
      socket.on('close', (code, reason) => {
        done({ code, reason: reason.toString() });
        waiter?.();
      }),
    );
    socket.on('message', (data) => {
      queue.push(JSON.parse(data.toString()) as Record<string, unknown>);
      waiter?.();
    });
    socket.on('unexpected-response', (_request, response) => {
      let body = '';
      response.on('data', (chunk: Buffer) => (body += chunk.toString()));
      response.on('end', () => reject(Object.assign(new Error(`HTTP ${response.statusCode}: ${body}`), { status: response.statusCode, body })));
    });
    socket.on('error', reject);
    socket.on('open', () =>
      resolve({
        socket,
        closed,
        send: (value) => socket.send(typeof value === 'string' ? value : JSON.stringify(value)),
        async next<T>(match: (message: Record<string, unknown>) => boolean, what: string): Promise<T> {
          for (;;) {
            while (queue.length > 0) {
              const message = queue.shift()!;
              if (match(message)) return message as T;
            }
            if (socket.readyState !== WebSocket.OPEN) throw new Error(`connection closed while waiting for ${what}`);
            await new Promise<void>((wake) => (waiter = wake));
            waiter = null;
          }
        },
      }),
    );
  });
}
