// Pseudo-terminal pairs made by socat for the serial tests. socat is required: missing, the tests fail.
import { spawn, spawnSync, type ChildProcess } from 'node:child_process';
import { existsSync } from 'node:fs';
import { until } from './wait.js';

export function requireSocat(): void {
  const probe = spawnSync('socat', ['-V'], { stdio: 'ignore' });
  if (probe.error !== undefined || probe.status !== 0) {
    throw new Error('socat is missing: these tests need real pseudo-terminals; install it with `apt-get install -y socat`');
  }
}

export interface PtyPair {
  readonly process: ChildProcess;
  /** Resolves when socat has exited. */
  stop(): Promise<void>;
}

/** Starts `socat pty,raw,echo=0,link=A pty,raw,echo=0,link=B` and waits until both links exist. */
export async function startPtyPair(linkA: string, linkB: string): Promise<PtyPair> {
  const child = spawn('socat', [`pty,raw,echo=0,link=${linkA}`, `pty,raw,echo=0,link=${linkB}`], { stdio: ['ignore', 'ignore', 'pipe'] });
  let stderr = '';
  child.stderr!.on('data', (chunk: Buffer) => (stderr += chunk.toString()));
  const exited = new Promise<void>((resolve) => child.once('exit', () => resolve()));
  let hasExited = false;
  void exited.then(() => (hasExited = true));
  const pair: PtyPair = {
    process: child,
    async stop() {
      if (!hasExited) child.kill('SIGTERM');
      await exited;
    },
  };
  try {
    await until(() => hasExited || (existsSync(linkA) && existsSync(linkB)), 'socat pty links');
    if (hasExited) throw new Error(`socat exited early (code ${child.exitCode}): ${stderr}`);
  } catch (error) {
    await pair.stop();
    throw error;
  }
  return pair;
}
