// A real Mosquitto broker for tests: its own config file on a free loopback port, stopped by its PID.
import { spawn, spawnSync, type ChildProcess } from 'node:child_process';
import { chmodSync, mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { createConnection, createServer } from 'node:net';
import { tmpdir } from 'node:os';
import { join } from 'node:path';

export interface Broker {
  readonly url: string;
  readonly port: number;
  stop(): Promise<void>;
}

function freePort(): Promise<number> {
  return new Promise((resolve, reject) => {
    const server = createServer();
    server.once('error', reject);
    server.listen(0, '127.0.0.1', () => {
      const address = server.address();
      server.close(() => resolve(typeof address === 'object' && address !== null ? address.port : 0));
    });
  });
}

function accepts(port: number): Promise<boolean> {
  return new Promise((resolve) => {
    const socket = createConnection({ host: '127.0.0.1', port });
    socket.once('connect', () => {
      socket.destroy();
      resolve(true);
    });
    socket.once('error', () => resolve(false));
  });
}

/** Starts mosquitto; with `users`, anonymous access is off and only those name/password pairs may connect. */
export async function startBroker(users?: Record<string, string>): Promise<Broker> {
  if (spawnSync('sh', ['-c', 'command -v mosquitto']).status !== 0) {
    throw new Error('mosquitto is not installed: these tests need a real broker (apt-get install -y mosquitto)');
  }
  const dir = mkdtempSync(join(tmpdir(), 'fringetally-mosquitto-'));
  const port = await freePort();
  const lines = [`listener ${port} 127.0.0.1`, 'persistence false', 'log_dest stderr', 'log_type error'];
  if (users) {
    const passwordFile = join(dir, 'passwords');
    writeFileSync(passwordFile, '');
    for (const [user, password] of Object.entries(users)) {
      const made = spawnSync('mosquitto_passwd', ['-b', passwordFile, user, password]);
      if (made.status !== 0) throw new Error(`mosquitto_passwd failed: ${made.stderr.toString()}`);
    }
    // Started as root, mosquitto drops to its own user, which must be able to read the test's files.
    chmodSync(dir, 0o755);
    chmodSync(passwordFile, 0o644);
    lines.push('allow_anonymous false', `password_file ${passwordFile}`);
  } else {
    lines.push('allow_anonymous true');
  }
  const config = join(dir, 'mosquitto.conf');
  writeFileSync(config, lines.join('\n') + '\n');
  const child: ChildProcess = spawn('mosquitto', ['-c', config], { stdio: ['ignore', 'ignore', 'pipe'] });
  let stderr = '';
  child.stderr!.on('data', (chunk: Buffer) => (stderr += chunk.toString()));
  const exited = new Promise<void>((resolve) => child.once('exit', () => resolve()));
  const stop = async () => {
    if (child.exitCode === null && child.pid !== undefined) process.kill(child.pid, 'SIGTERM');
    await exited;
    rmSync(dir, { recursive: true, force: true });
  };
  for (let attempt = 0; attempt < 100; attempt++) {
    if (child.exitCode !== null) break;
    if (await accepts(port)) return { url: `mqtt://127.0.0.1:${port}`, port, stop };
    await new Promise((resolve) => setTimeout(resolve, 50));
  }
  await stop();
  throw new Error(`mosquitto did not start on port ${port}: ${stderr}`);
}
