// A real Mosquitto broker for tests: its own config file on a free loopback port, stopped by its PID; with TLS,
// a throwaway CA and server certificate made by openssl for this broker alone.
import { spawn, spawnSync, type ChildProcess } from 'node:child_process';
import { chmodSync, mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { createConnection, createServer } from 'node:net';
import { tmpdir } from 'node:os';
import { join } from 'node:path';

export interface Broker {
  readonly url: string;
  /** With TLS: the PEM file and text of the CA that signed the broker's certificate. */
  readonly caFile?: string;
  readonly ca?: string;
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

function openssl(dir: string, args: readonly string[]): void {
  const made = spawnSync('openssl', args, { cwd: dir });
  if (made.error !== undefined) throw new Error(`openssl is missing: the TLS tests need it (apt-get install -y openssl): ${made.error.message}`);
  if (made.status !== 0) throw new Error(`openssl ${args[0]} failed: ${made.stderr.toString()}`);
}

/** A CA and a server certificate for 127.0.0.1 signed by it, valid for two days (P-256 keys: quick to make). */
function makeCertificates(dir: string): { caFile: string; certFile: string; keyFile: string } {
  const key = ['-newkey', 'ec', '-pkeyopt', 'ec_paramgen_curve:prime256v1', '-nodes'];
  openssl(dir, ['req', '-x509', ...key, '-keyout', 'ca.key', '-out', 'ca.pem', '-days', '2', '-subj', '/CN=fringetally test CA']);
  openssl(dir, ['req', ...key, '-keyout', 'server.key', '-out', 'server.csr', '-subj', '/CN=127.0.0.1']);
  writeFileSync(join(dir, 'server.ext'), 'subjectAltName = IP:127.0.0.1, DNS:localhost\n');
  openssl(dir, ['x509', '-req', '-in', 'server.csr', '-CA', 'ca.pem', '-CAkey', 'ca.key', '-CAcreateserial', '-out', 'server.pem', '-days', '2', '-extfile', 'server.ext']);
  for (const file of ['ca.pem', 'server.pem', 'server.key']) chmodSync(join(dir, file), 0o644);
  return { caFile: join(dir, 'ca.pem'), certFile: join(dir, 'server.pem'), keyFile: join(dir, 'server.key') };
}

export interface BrokerOptions {
  /** Anonymous access off: only these name/password pairs may connect. */
  readonly users?: Record<string, string>;
  /** Listen with TLS only (mqtts://), on a certificate of a CA made for this broker. */
  readonly tls?: boolean;
  /** Listen on this port (to restart a broker where clients expect it). Default: a free one. */
  readonly port?: number;
}

export async function startBroker(options: BrokerOptions = {}): Promise<Broker> {
  const { users, tls = false } = options;
  if (spawnSync('sh', ['-c', 'command -v mosquitto']).status !== 0) {
    throw new Error('mosquitto is not installed: these tests need a real broker (apt-get install -y mosquitto)');
  }
  const dir = mkdtempSync(join(tmpdir(), 'fringetally-mosquitto-'));
  // Started as root, mosquitto drops to its own user, which must be able to read the test's files.
  chmodSync(dir, 0o755);
  const port = options.port ?? (await freePort());
  const lines = [`listener ${port} 127.0.0.1`, 'persistence false', 'log_dest stderr', 'log_type error'];
  const certificates = tls ? makeCertificates(dir) : null;
  if (certificates !== null) {
    lines.push(`cafile ${certificates.caFile}`, `certfile ${certificates.certFile}`, `keyfile ${certificates.keyFile}`);
  }
  if (users) {
    const passwordFile = join(dir, 'passwords');
    writeFileSync(passwordFile, '');
    for (const [user, password] of Object.entries(users)) {
      const made = spawnSync('mosquitto_passwd', ['-b', passwordFile, user, password]);
      if (made.status !== 0) throw new Error(`mosquitto_passwd failed: ${made.stderr.toString()}`);
    }
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
    if (await accepts(port)) {
      if (certificates === null) return { url: `mqtt://127.0.0.1:${port}`, port, stop };
      return { url: `mqtts://127.0.0.1:${port}`, port, stop, caFile: certificates.caFile, ca: readFileSync(certificates.caFile, 'utf8') };
    }
    await new Promise((resolve) => setTimeout(resolve, 50));
  }
  await stop();
  throw new Error(`mosquitto did not start on port ${port}: ${stderr}`);
}
