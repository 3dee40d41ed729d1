// `fringetally listen` with its network feed, end to end over a real pseudo-terminal pair (socat): the page and
// feed are up from launch (state waiting), a broker that is down never stops the measurement and its outage is
// in the summary, and the token is never printed. Feed option mistakes are usage errors before anything opens.
// The motion is emulate's invented one; positions are checked in tests/live, here only the feed's contracts.
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, afterEach, beforeAll, describe, expect, it } from 'vitest';
import { startBroker } from './broker.js';
import { openClient, type TestClient } from './support.js';
import { requireSocat, startPtyPair, type PtyPair } from '../serial/socat.js';
import { fringetally } from '../tools/cli.js';
import { finished, killAll, readJson, readRows, startCli } from '../live/processes.js';

const OPTICS = ['--wavelength-nm', '632.9908', '--fold', '2'];
const TOKEN = 'listen-feed-token-0123456789';
let dir = '';
const pairs: PtyPair[] = [];
const clients: TestClient[] = [];

beforeAll(() => {
  requireSocat();
  dir = mkdtempSync(join(tmpdir(), 'fringetally-listen-feed-'));
});
afterEach(async () => {
  for (const client of clients.splice(0)) client.socket.terminate();
  await killAll();
  await Promise.all(pairs.splice(0).map((pair) => pair.stop()));
});
afterAll(() => rmSync(dir, { recursive: true, force: true }));

describe('listen with a network feed', () => {
  it('serves from launch, keeps measuring with its broker down, reports the outage, and never prints the token', async () => {
    // A port where no broker listens: take one from a broker and stop it.
    const broker = await startBroker();
    const mqttUrl = broker.url;
    await broker.stop();
    const device = join(dir, 'device');
    const firmware = join(dir, 'firmware');
    pairs.push(await startPtyPair(device, firmware));
    const listen = startCli(
      ['listen', '--port', device, ...OPTICS, '--out', 'run.csv', '--duration', '0.5', '--summary', 'run.summary.json',
        '--serve', '127.0.0.1:0', '--mqtt', mqttUrl],
      dir,
      { FRINGETALLY_FEED_TOKEN: TOKEN },
    );
    await listen.stderrHas(/live page at \S+/);
    const line = /live page at (http:\/\/127\.0\.0\.1:(\d+)\/\S*) \(feed (\S+); <token> is the one from \$FRINGETALLY_FEED_TOKEN\); read-only/.exec(listen.output.stderr);
    expect(line, listen.output.stderr).not.toBeNull();
    expect(line![1]).toBe(`http://127.0.0.1:${line![2]}/?token=<token>`);
    // Before any sample: the feed is up and says so.
    const c = await openClient(`ws://127.0.0.1:${line![2]}/feed?token=${TOKEN}`);
    clients.push(c);
    expect(await c.next((m) => m.type === 'hello', 'hello')).toMatchObject({ state: 'waiting' });
    c.send({ type: 'subscribe', updateHz: 20 });
    await listen.stderrHas('unreachable');
    const emulate = startCli(
      ['emulate', '--port', firmware, '--rate-hz', '100000', '--velocity-m-s', '0.001', ...OPTICS, '--duration', '0.5',
        '--samples-per-frame', '100', '--include-rate', '--quiet'],
      dir,
    );
    expect(await c.next((m) => m.type === 'status' && m.state === 'live', 'status live')).toMatchObject({ rateHz: 100000 });
    await c.next((m) => m.type === 'update' && (m.sampleIndex as number) > 0, 'an update');
    expect(await finished(emulate), emulate.output.stderr).toBe(0);
    expect(await finished(listen), listen.output.stderr).toBe(0);
    // A normal end: the feed says so and closes normally.
    await c.next((m) => m.type === 'end', 'end');
    expect((await c.closed).code).toBe(1000);
    expect(readRows(join(dir, 'run.csv')).columns.t!.length).toBe(50_000);
    expect(listen.output.stderr).not.toContain(TOKEN);
    // One line for the outage, however many attempts it took.
    expect(listen.output.stderr.match(/MQTT broker at \S+ unreachable/g)).toHaveLength(1);
    expect(listen.output.stderr).toMatch(/MQTT: 0 messages published; 1 outage\(s\), [\d.]+ s offline, never connected/);
    const summary = readJson<{ mqtt: { connected: boolean; connections: number; outages: number; outageMs: number; failedAttempts: number; lastError: string } }>(
      join(dir, 'run.summary.json'),
    );
    expect(summary.mqtt).toMatchObject({ connected: false, connections: 0, outages: 1, lastError: expect.stringMatching(/ECONNREFUSED/) });
    expect(summary.mqtt.failedAttempts).toBeGreaterThanOrEqual(1);
    expect(summary.mqtt.outageMs).toBeGreaterThan(0);
  });

  it('refuses feed option mistakes as usage errors, before opening anything', async () => {
    const base = ['listen', '--port', '/dev/null', ...OPTICS, '--format', 'csv', '--out', '-'];
    const cases: [string[], RegExp][] = [
      [['--serve', '0.0.0.0:0'], /--serve 0\.0\.0\.0:0 is reachable from the network: set --token or \$FRINGETALLY_FEED_TOKEN/],
      [['--serve', '0', '--token', 'short'], /the feed token \(from --token\) must be at least 16 characters \(got 5\)/],
      [['--serve', '0', '--proxy', '127.0.0.1'], /--proxy makes the feed reachable from the network: set --token/],
      [['--serve', '0', '--allow-origin', 'https://hmi.example/page'], /--allow-origin expects an origin such as https:\/\/hmi\.lab\.example, scheme and host only \(got "https:\/\/hmi\.example\/page"\)/],
      [['--allow-origin', 'https://hmi.example'], /--allow-origin applies to --serve/],
    ];
    const results = await Promise.all(cases.map(([extra]) => fringetally([...base, ...extra], dir)));
    results.forEach((result, k) => {
      expect(result.code, result.stderr).toBe(2);
      expect(result.stderr).toMatch(cases[k]![1]);
    });
  });
});
