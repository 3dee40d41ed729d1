// Clean stops of listen and emulate over real pseudo-terminals (socat), in every state: an output nobody reads
// (bounded input buffer, then a stop naming it), a signal while that output is stalled, a signal while waiting
// for data or for a port that does not exist, and emulate with nobody reading its port. Each test measures the
// time from the signal to the exit and prints it (the figure is reported, not asserted: no timed assertions);
// the deadline in `finished` only keeps a hang from blocking the suite. Frames are an invented constant motion.
import { spawn } from 'node:child_process';
import { existsSync, readdirSync } from 'node:fs';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { beforeAll, describe, expect, it } from 'vitest';
import { until } from '../serial/wait.js';
import { finished, readJson, startCli, usePtyPairs, type RunningCli } from './processes.js';

const OPTICS = ['--wavelength-nm', '632.9908', '--fold', '2'];
const EMULATE = ['--rate-hz', '100000', '--velocity-m-s', '0.001', ...OPTICS, '--include-rate', '--quiet'];
const TOOL = fileURLToPath(new URL('../../dist/tools/fringetally.js', import.meta.url));

const ptys = usePtyPairs('fringetally-stops-');
let dir = '';
beforeAll(() => (dir = ptys.dir()));
const ptyPair = () => ptys.pair();

/** Sends the signal, waits for the exit and reports the time it took. */
async function signalAndTime(cli: RunningCli, signal: NodeJS.Signals, what: string): Promise<number | string> {
  const sent = performance.now();
  cli.child.kill(signal);
  const code = await finished(cli);
  console.info(`${what}: ${signal} to exit ${(performance.now() - sent).toFixed(0)} ms`);
  return code;
}

interface Summary {
  stopReason: string;
  stalledOutput: string | null;
  samplesDelivered: number;
  rowsWritten: number;
}

describe('listen stops cleanly', () => {
  it('with --out - into a pipe nobody reads: stops once the input buffer is full, naming standard output', async () => {
    const { device, firmware } = await ptyPair();
    const summary = join(dir, 'stalled.json');
    // stdout is a pipe this test never reads: it fills, then listen's writes wait.
    const listen = spawn(process.execPath, [TOOL, 'listen', '--port', device, ...OPTICS, '--out', '-', '--format', 'csv', '--summary', summary, '--input-buffer-mib', '1'], { cwd: dir, stdio: ['ignore', 'pipe', 'pipe'] });
    listen.stdout!.pause();
    let stderr = '';
    listen.stderr!.on('data', (chunk: Buffer) => (stderr += chunk.toString()));
    const exited = new Promise<number | null>((resolve) => listen.once('close', (code) => resolve(code)));
    await until(() => stderr.includes('link up'), 'listen to open the port', 20_000);
    const emulate = startCli(['emulate', '--port', firmware, ...EMULATE, '--duration', '20'], dir);
    expect(await exited, stderr).toBe(1);
    emulate.child.kill('SIGTERM');
    await finished(emulate);
    expect(stderr).toMatch(/the result output \(standard output\) accepted nothing while 1 MiB of input waited; stopped/);
    const written = readJson<Summary>(summary);
    expect(written).toMatchObject({ stopReason: 'stalled', stalledOutput: 'the result output (standard output)' });
    // Everything received was either processed or within the 1 MiB buffer: 2 channels × 2 bytes per sample plus
    // framing, so at most about 2^20 / 4 samples beyond the rows handed to the pipe.
    expect(written.samplesDelivered).toBeGreaterThan(0);
  });

  it('on SIGINT while its output is stalled: exits with the summary written and the stalled output named', async () => {
    const { device, firmware } = await ptyPair();
    const summary = join(dir, 'signal-stalled.json');
    const listen = spawn(process.execPath, [TOOL, 'listen', '--port', device, ...OPTICS, '--out', '-', '--format', 'csv', '--summary', summary], { cwd: dir, stdio: ['ignore', 'pipe', 'pipe'] });
    listen.stdout!.pause();
    let stderr = '';
    listen.stderr!.on('data', (chunk: Buffer) => (stderr += chunk.toString()));
    const exited = new Promise<number | null>((resolve) => listen.once('close', (code) => resolve(code)));
    await until(() => stderr.includes('link up'), 'listen to open the port', 20_000);
    const emulate = startCli(['emulate', '--port', firmware, ...EMULATE, '--duration', '2'], dir);
    // Rows start after the live fit; the pipe (64 KiB) then fills within a few thousand rows.
    await until(() => stderr.includes('fitted the correction'), 'the live fit', 20_000);
    await new Promise((resolve) => setTimeout(resolve, 500));
    const sent = performance.now();
    listen.kill('SIGINT');
    expect(await exited, stderr).toBe(0);
    console.info(`listen, output stalled: SIGINT to exit ${(performance.now() - sent).toFixed(0)} ms`);
    await finished(emulate);
    expect(readJson<Summary>(summary)).toMatchObject({ stopReason: 'signal', stalledOutput: 'the result output (standard output)' });
  });

  it('on SIGTERM while waiting for data: exits 0 with the files closed and the summary written', async () => {
    const { device } = await ptyPair();
    const listen = startCli(['listen', '--port', device, ...OPTICS, '--out', 'idle.csv', '--summary', 'idle.json'], dir);
    await listen.stderrHas('link up');
    expect(await signalAndTime(listen, 'SIGTERM', 'listen, waiting for data'), listen.output.stderr).toBe(0);
    expect(readJson<Summary>(join(dir, 'idle.json'))).toMatchObject({ stopReason: 'signal', samplesDelivered: 0, rowsWritten: 0 });
    expect(existsSync(join(dir, 'idle.csv'))).toBe(true);
    expect(readdirSync(dir).filter((name) => name.includes('partial'))).toEqual([]);
  });

  it('on SIGTERM while the port does not exist: exits 0 with the summary; without a signal it gives up as documented', async () => {
    const missing = join(dir, 'no-such-device');
    const waiting = startCli(['listen', '--port', missing, ...OPTICS, '--out', 'missing.csv', '--summary', 'missing.json', '--open-retries', '1000'], dir);
    await waiting.stderrHas('link down (open failed');
    expect(await signalAndTime(waiting, 'SIGTERM', 'listen, port missing'), waiting.output.stderr).toBe(0);
    expect(readJson<Summary>(join(dir, 'missing.json'))).toMatchObject({ stopReason: 'signal', samplesDelivered: 0 });

    const givingUp = startCli(['listen', '--port', missing, ...OPTICS, '--out', 'gone.csv', '--open-retries', '2', '--retry-ms', '10'], dir);
    expect(await finished(givingUp)).toBe(1);
    expect(givingUp.output.stderr).toContain('retrying with backoff (failed attempt 1; gives up after 3)');
    expect(givingUp.output.stderr).toMatch(/gave up after 3 failed open attempts \(it never opened: check the path\); last error: .*No such file or directory/);
    expect(existsSync(join(dir, 'gone.csv'))).toBe(false);
  });
});

describe('emulate stops cleanly', () => {
  it('ends with exit 1 naming the port when nothing reads it, and on SIGTERM while stalled writes its summary', async () => {
    const first = await ptyPair();
    const unread = startCli(['emulate', '--port', first.firmware, ...EMULATE], dir);
    expect(await finished(unread)).toBe(1);
    expect(unread.output.stderr).toContain(`${first.firmware}: nothing has read the port for 2 s (is the receiver still running?)`);

    const second = await ptyPair();
    // Without --quiet, emulate notes that 9600 Bd cannot carry the stream just before it opens the port.
    const stalled = startCli(['emulate', '--port', second.firmware, ...EMULATE.filter((arg) => arg !== '--quiet'), '--baud', '9600', '--summary', 'emulate.json'], dir);
    await stalled.stderrHas('note: about');
    // The pty pair's buffers take about a hundred frames (1 s at this pace would be 1562): stalled well before 2 s.
    await new Promise((resolve) => setTimeout(resolve, 1000));
    expect(await signalAndTime(stalled, 'SIGTERM', 'emulate, port not read'), stalled.output.stderr).toBe(0);
    expect(readJson<{ stoppedBy: string; framesSent: number }>(join(dir, 'emulate.json'))).toMatchObject({ stoppedBy: 'SIGTERM' });
  });
});
