#!/usr/bin/env node
// Run by `npm test` before the suite: the tests drive real system tools (gcc compiles the firmware encoder,
// socat makes pseudo-terminal pairs, mosquitto is the MQTT broker, openssl makes its test certificates,
// chromium renders the report and the live page). Those tests fail, never skip, when a tool is missing, so a
// fresh machine gets them here: installed through apt-get when we can, else a stop at once with the command.
import { spawnSync } from 'node:child_process';
import { accessSync, constants } from 'node:fs';
import { delimiter, join } from 'node:path';

/** Debian package → the executables that show it is installed (any one suffices). */
const packages = [
  { name: 'gcc', executables: ['gcc'] },
  { name: 'socat', executables: ['socat'] },
  { name: 'mosquitto', executables: ['mosquitto', '/usr/sbin/mosquitto'] },
  { name: 'openssl', executables: ['openssl'] },
  { name: 'chromium', executables: ['/usr/bin/chromium'] },
];

function executable(path) {
  try {
    accessSync(path, constants.X_OK);
    return true;
  } catch {
    return false;
  }
}

function found(command) {
  if (command.includes('/')) return executable(command);
  return (process.env.PATH ?? '').split(delimiter).some((dir) => dir !== '' && executable(join(dir, command)));
}

const missing = packages.filter((p) => !p.executables.some(found)).map((p) => p.name);
if (missing.length === 0) process.exit(0);

const install = `apt-get install -y ${missing.join(' ')}`;
const root = typeof process.getuid === 'function' && process.getuid() === 0;
if (!root || !found('apt-get')) {
  process.stderr.write(
    `npm test needs the system packages ${missing.join(', ')}, which are missing; ` +
      `install them and run npm test again:\n  sudo apt-get update && sudo ${install}\n`,
  );
  process.exit(1);
}

process.stderr.write(`npm test: installing the system packages the tests use (${missing.join(', ')}) with apt-get…\n`);
const env = { ...process.env, DEBIAN_FRONTEND: 'noninteractive' };
for (const args of [['update', '-qq'], ['install', '-y', '-qq', ...missing]]) {
  const run = spawnSync('apt-get', args, { stdio: ['ignore', 'ignore', 'inherit'], env });
  if (run.status !== 0) {
    process.stderr.write(`apt-get ${args.join(' ')} failed (exit ${run.status ?? run.signal}); run it by hand:\n  apt-get update && ${install}\n`);
    process.exit(1);
  }
}
