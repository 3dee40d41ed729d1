// Child processes of the built CLI for the live tests: started in the background, their output collected, and
// every one still running killed by `killAll` (afterEach), so a failing test leaves nothing behind.
import { spawn, type ChildProcess } from 'node:child_process';
import { mkdtempSync, readFileSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { afterAll, afterEach, beforeAll } from 'vitest';
import { requireSocat, startPtyPair, type PtyPair } from '../serial/socat.js';
import { until } from '../serial/wait.js';

const TOOL = fileURLToPath(new URL('../../dist/tools/fringetally.js', import.meta.url));

export interface RunningCli {
  readonly child: ChildProcess;
  readonly output: { stdout: string; stderr: string };
  /** Resolves with the exit code (or the signal name) once the process has ended. */
  readonly exited: Promise<number | string>;
  /** Waits until stderr contains `text` (deadline only against hangs). */
  stderrHas(text: string | RegExp, deadlineMs?: number): Promise<void>;
}

const running = new Set<ChildProcess>();

/** `stdin`: a file descriptor for the child's standard input (a pseudo-terminal, for keys); default none. */
export function startCli(args: readonly string[], cwd: string, env: Record<string, string> = {}, stdin: number | 'ignore' = 'ignore'): RunningCli {
  const child = spawn(process.execPath, [TOOL, ...args], { cwd, stdio: [stdin, 'pipe', 'pipe'], env: { ...process.env, ...env } });
  running.add(child);
  const output = { stdout: '', stderr: '' };
  child.stdout!.on('data', (chunk: Buffer) => (output.stdout += chunk.toString()));
  child.stderr!.on('data', (chunk: Buffer) => (output.stderr += chunk.toString()));
  const exited = new Promise<number | string>((resolve) =>
    child.once('close', (code, signal) => {
      running.delete(child);
      resolve(code ?? signal ?? 'unknown');
    }),
  );
  const matches = (text: string | RegExp) => (typeof text === 'string' ? output.stderr.includes(text) : text.test(output.stderr));
  return {
    child,
    output,
    exited,
    stderrHas: (text, deadlineMs = 15_000) =>
      until(() => matches(text) || child.exitCode !== null, `stderr to show ${String(text)}`, deadlineMs).then(() => {
        if (!matches(text)) throw new Error(`process ended (code ${child.exitCode}) before stderr showed ${String(text)}:\n${output.stderr}`);
      }),
  };
}

/** Runs to the end; the deadline only keeps a broken test from hanging. */
export async function finished(cli: RunningCli, deadlineMs = 20_000): Promise<number | string> {
  let timer: ReturnType<typeof setTimeout> | undefined;
  const deadline = new Promise<never>((_, reject) => {
    timer = setTimeout(() => reject(new Error(`process did not end within ${deadlineMs} ms:\n${cli.output.stderr}`)), deadlineMs);
  });
  try {
    return await Promise.race([cli.exited, deadline]);
  } finally {
    clearTimeout(timer);
  }
}

export async function killAll(): Promise<void> {
  const children = [...running];
  for (const child of children) child.kill('SIGKILL');
  await Promise.all(children.map((child) => new Promise<void>((resolve) => (child.exitCode !== null || child.signalCode !== null ? resolve() : child.once('close', () => resolve())))));
  running.clear();
}

export function readJson<T>(path: string): T {
  return JSON.parse(readFileSync(path, 'utf8')) as T;
}

/** Rows of a CSV file with a header line (`#` lines skipped): numeric columns by name, and the text ones. */
export function readRows(path: string): { columns: Record<string, number[]>; alarms: string[] } {
  const lines = readFileSync(path, 'utf8').split('\n').filter((line) => line !== '' && !line.startsWith('#'));
  const header = lines[0]!.split(',');
  const columns: Record<string, number[]> = Object.fromEntries(header.map((name) => [name, [] as number[]]));
  const alarms: string[] = [];
  const alarmColumn = header.indexOf('alarms');
  for (const line of lines.slice(1)) {
    const cells = line.split(',');
    header.forEach((name, k) => columns[name]!.push(Number(cells[k])));
    if (alarmColumn >= 0) alarms.push(cells[alarmColumn] ?? '');
  }
  return { columns, alarms };
}

/**
 * A temporary folder and socat pseudo-terminal pairs for the tests of one file: registers the hooks (socat
 * required; every child process and pair ended after each test; the folder removed at the end).
 */
export function usePtyPairs(prefix: string): { readonly dir: () => string; pair(): Promise<{ device: string; firmware: string }> } {
  let dir = '';
  let made = 0;
  const pairs: PtyPair[] = [];
  beforeAll(() => {
    requireSocat();
    dir = mkdtempSync(join(tmpdir(), prefix));
  });
  afterEach(async () => {
    await killAll();
    await Promise.all(pairs.splice(0).map((pair) => pair.stop()));
  });
  afterAll(() => rmSync(dir, { recursive: true, force: true }));
  return {
    dir: () => dir,
    async pair() {
      made++;
      const device = join(dir, `device-${made}`);
      const firmware = join(dir, `firmware-${made}`);
      pairs.push(await startPtyPair(device, firmware));
      return { device, firmware };
    },
  };
}
