// Re-referencing a running `fringetally listen`, end to end: a key typed on a real terminal (stdin is a socat
// pseudo-terminal), a real signal to the process, a command over the WebSocket feed (real client) and one over
// MQTT (a real Mosquitto broker). Commands need the token even on loopback; refused ones change nothing. The
// frames come from this test over a second pty pair: an invented constant motion with one lost frame (count lost).
import { closeSync, openSync, writeSync } from 'node:fs';
import { join } from 'node:path';
import mqtt from 'mqtt';
import { describe, expect, it } from 'vitest';
import { createFrameEmulator } from '../../tools/live/frame-emulator.js';
import { startBroker } from '../feed/broker.js';
import { openClient } from '../feed/support.js';
import { until } from '../serial/wait.js';
import { finished, readJson, readRows, startCli, usePtyPairs } from './processes.js';

const RATE = 100_000;
const SPF = 64;
const VELOCITY = 0.001; // m/s
const OPTICS = ['--wavelength-nm', '632.9908', '--fold', '2'];
const TOKEN = 'controls-token-0123456789';
/**
 * Largest |position − expected| accepted after a re-reference, m: noise-free frames (int16 rounding only) and the
 * live fit's residual give well under a nanometre (tests/live/live.test.ts allows 2 nm with noise); a re-reference
 * at the wrong sample is off by v/f = 10 nm per sample.
 */
const TOLERANCE_M = 2e-9;
const ptys = usePtyPairs('fringetally-controls-');

function frames(count: number): Uint8Array[] {
  const emulator = createFrameEmulator({
    rateHz: RATE, samplesPerFrame: SPF, axes: 1, motion: { kind: 'constant', velocityMS: VELOCITY }, wavelengthM: 632.9908e-9, fold: 2,
    refractiveIndex: 1, ellipse: { offsetX: 800, offsetY: -500, amplitudeX: 12000, amplitudeY: 10800, phaseErrorRad: 0.06 },
    noiseRms: 0, seed: 7, includeRate: true, startSequence: 0, text: false, faults: { garbageEvery: 0, garbageBytes: 1, dropEvery: 0, corruptEvery: 0 },
  });
  return Array.from({ length: count }, () => emulator.next(1).bytes.slice());
}

function write(path: string, chunks: readonly (Uint8Array | string)[]): void {
  const fd = openSync(path, 'w');
  try {
    for (const chunk of chunks) writeSync(fd, typeof chunk === 'string' ? Buffer.from(chunk) : chunk);
  } finally {
    closeSync(fd);
  }
}

interface Reference {
  axes: string[];
  sampleIndex: number;
  presetM: number;
  origin: string;
}

describe('listen: re-reference while running', () => {
  it('key z zeroes, SIGUSR2 presets, WebSocket and MQTT commands with the token re-reference, commands without it change nothing, q stops', async () => {
    const broker = await startBroker();
    try {
      const dir = ptys.dir();
      const link = await ptys.pair();
      const keyboard = await ptys.pair();
      const terminal = openSync(keyboard.device, 'r+');
      const listen = startCli(
        ['listen', '--port', link.device, ...OPTICS, '--out', 'controls.csv', '--summary', 'controls.json', '--fit-samples', '1024', '--preset-mm', '1.5',
          '--serve', '127.0.0.1:0', '--mqtt', broker.url],
        dir,
        { FRINGETALLY_FEED_TOKEN: TOKEN },
        terminal,
      );
      closeSync(terminal); // the child has its own
      await listen.stderrHas('keys: z zero, p preset to 1.5 mm, q or Ctrl-C stop; signals: SIGUSR1 zero, SIGUSR2 preset to 1.5 mm');
      await listen.stderrHas('link up');
      await listen.stderrHas(/MQTT broker at \S+ connected/);
      const sent = frames(200);
      // A watcher on the feed tells when listen has processed the frames sent (the latest sample of its updates),
      // so that each re-reference falls between two batches.
      const feedUrl = /\(feed (ws:\/\/127\.0\.0\.1:\d+\/feed)\?token=<token>/.exec(listen.output.stderr)![1]!;
      const watcher = await openClient(`${feedUrl}?token=${TOKEN}`);
      watcher.send({ type: 'subscribe', updateHz: 50 });
      const processed = (frameCount: number) =>
        watcher.next((m) => m.type === 'update' && (m.sampleIndex as number) >= frameCount * SPF - 1, `positions up to frame ${frameCount}`);

      // Frame 30 lost: count lost from sample 31 × 64. Then the key.
      write(link.firmware, [...sent.slice(0, 30), ...sent.slice(31, 40)]);
      await listen.stderrHas('fitted the correction');
      await processed(40);
      write(keyboard.firmware, ['z']);
      await listen.stderrHas('by key z');

      write(link.firmware, sent.slice(40, 80));
      await processed(80);
      listen.child.kill('SIGUSR2');
      await listen.stderrHas('by SIGUSR2');

      write(link.firmware, sent.slice(80, 120));
      await processed(120);
      const client = await openClient(`${feedUrl}?token=${TOKEN}`);
      const hello = await client.next((m) => m.type === 'hello', 'hello');
      expect(hello).toMatchObject({ readOnly: false, commands: ['reference'] });
      client.send({ type: 'reference', presetM: -0.002, id: 'no-token' });
      expect(await client.next((m) => m.id === 'no-token', 'refusal')).toEqual({
        type: 'error', code: 'refused', id: 'no-token', message: 'a command must carry the token ("token"); nothing changed',
      });
      client.send({ type: 'reference', token: 'not-the-token-0123456789', presetM: -0.002, id: 'wrong' });
      expect(await client.next((m) => m.id === 'wrong', 'refusal')).toMatchObject({ type: 'error', code: 'refused', message: 'wrong token; nothing changed' });
      client.send({ type: 'reference', token: TOKEN, axis: 'Y', id: 'axis' });
      expect(await client.next((m) => m.id === 'axis', 'refusal')).toMatchObject({ type: 'error', code: 'refused', message: expect.stringContaining('axis must be one of X') });
      client.send({ type: 'reference', token: TOKEN, presetM: -0.002, id: 'ok' });
      const referenced = await client.next<{ type: string; sampleIndex: number; axes: string[]; presetM: number }>((m) => m.id === 'ok', 'reply');
      expect(referenced).toMatchObject({ type: 'referenced', axes: ['X'], presetM: -0.002 });
      client.socket.close();

      write(link.firmware, sent.slice(120, 160));
      await processed(160);
      const mqttClient = await mqtt.connectAsync(broker.url, { reconnectPeriod: 0 });
      try {
        const replies: Record<string, unknown>[] = [];
        mqttClient.on('message', (_topic, payload) => replies.push(JSON.parse(payload.toString()) as Record<string, unknown>));
        await mqttClient.subscribeAsync('fringetally/command/reply', { qos: 1 });
        // Refused commands change nothing, so one is repeated until the publisher answers: its subscription is then in place.
        const wrong = JSON.stringify({ type: 'reference', token: 'not-the-token-0123456789', id: 'mqtt-wrong' });
        for (let attempt = 0; replies.length === 0; attempt++) {
          if (attempt === 100) throw new Error('no reply on fringetally/command/reply');
          await mqttClient.publishAsync('fringetally/command', wrong, { qos: 1 });
          await new Promise((resolve) => setTimeout(resolve, 200));
        }
        expect(replies[0]).toMatchObject({ type: 'error', code: 'refused', id: 'mqtt-wrong', message: 'wrong token; nothing changed' });
        await mqttClient.publishAsync('fringetally/command', JSON.stringify({ type: 'reference', token: TOKEN, id: 'mqtt-ok' }), { qos: 1 });
        await until(() => replies.some((reply) => reply.id === 'mqtt-ok'), 'the MQTT command done', 20_000);
        expect(replies.find((reply) => reply.id === 'mqtt-ok')).toMatchObject({ type: 'referenced', axes: ['X'], presetM: 0 });
      } finally {
        await mqttClient.endAsync();
      }

      await listen.stderrHas('by MQTT');
      write(link.firmware, sent.slice(160, 200));
      await processed(200);
      watcher.socket.close();
      write(keyboard.firmware, ['q']);
      expect(await finished(listen), listen.output.stderr).toBe(0);

      const summary = readJson<{ references: Reference[]; stopReason: string; countLostAtEnd: boolean; samplesDelivered: number }>(join(dir, 'controls.json'));
      expect(summary.stopReason).toBe('signal');
      expect(summary.references.map(({ origin, presetM, axes }) => ({ origin, presetM, axes }))).toEqual([
        { origin: 'key z', presetM: 0, axes: ['X'] },
        { origin: 'SIGUSR2', presetM: 0.0015, axes: ['X'] },
        { origin: 'WebSocket 127.0.0.1', presetM: -0.002, axes: ['X'] },
        { origin: 'MQTT', presetM: 0, axes: ['X'] },
      ]);
      expect(summary.references[2]!.sampleIndex).toBe(referenced.sampleIndex);
      expect(summary.countLostAtEnd).toBe(false);

      // Each reference sample reads its preset, and the motion goes on from there at v/f per sample.
      const rows = readRows(join(dir, 'controls.csv'));
      const index = rows.columns.t!.map((t) => Math.round(t * RATE));
      const row = (sample: number) => index.indexOf(sample);
      const references = summary.references;
      references.forEach((reference, k) => {
        const end = references[k + 1]?.sampleIndex ?? index.at(-1)! + 1;
        for (const sample of [reference.sampleIndex, Math.floor((reference.sampleIndex + end) / 2), end - 1]) {
          const expected = reference.presetM + (VELOCITY * (sample - reference.sampleIndex)) / RATE;
          expect(Math.abs(rows.columns.position_m![row(sample)]! - expected), `${reference.origin}, sample ${sample}`).toBeLessThan(TOLERANCE_M);
        }
      });
      // count_lost from the gap to the zero, and never after it.
      const gapRow = row(31 * SPF);
      const zeroRow = row(references[0]!.sampleIndex);
      expect(zeroRow).toBeGreaterThan(gapRow);
      expect(rows.alarms[gapRow]).toBe('input_gap count_lost');
      expect(rows.alarms.slice(gapRow, zeroRow).every((alarms) => alarms.includes('count_lost'))).toBe(true);
      expect(rows.alarms.slice(zeroRow).every((alarms) => alarms === '')).toBe(true);
      expect(listen.output.stderr).toMatch(/zeroed axis X at sample \d+ \(t = [\d.]+ s\) by key z; count_lost cleared from there/);
      expect(listen.output.stderr).not.toContain(TOKEN);
    } finally {
      await broker.stop();
    }
  });

  it('SIGUSR1 zeroes; a preset without --preset-mm and a re-reference before any position are refused with the reason', async () => {
    const dir = ptys.dir();
    const link = await ptys.pair();
    const listen = startCli(['listen', '--port', link.device, ...OPTICS, '--out', 'usr1.csv', '--summary', 'usr1.json', '--fit-samples', '1024'], dir);
    await listen.stderrHas('signals: SIGUSR1 zero, SIGUSR2 preset: give --preset-mm');
    await listen.stderrHas('link up');
    listen.child.kill('SIGUSR1');
    await listen.stderrHas('SIGUSR1: cannot re-reference: no position yet (no samples, or the live fit still holds the first ones); nothing changed');
    listen.child.kill('SIGUSR2');
    await listen.stderrHas('SIGUSR2: no --preset-mm given, nothing changed');
    write(link.firmware, frames(40));
    await listen.stderrHas('fitted the correction');
    listen.child.kill('SIGUSR1');
    await listen.stderrHas('by SIGUSR1');
    listen.child.kill('SIGINT');
    expect(await finished(listen), listen.output.stderr).toBe(0);
    const summary = readJson<{ references: Reference[] }>(join(dir, 'usr1.json'));
    expect(summary.references).toHaveLength(1);
    expect(summary.references[0]).toMatchObject({ origin: 'SIGUSR1', presetM: 0, axes: ['X'] });
  });
});
