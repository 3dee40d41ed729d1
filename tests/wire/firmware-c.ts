// Builds tools/firmware/wire_vectors.c with the machine's gcc into a temp dir and runs commands through it.
import { execFileSync } from 'node:child_process';
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';

const source = fileURLToPath(new URL('../../tools/firmware/wire_vectors.c', import.meta.url));

export interface FirmwareProgram {
  /** Sends command lines on stdin; returns stdout lines. */
  run(commands: readonly string[]): string[];
  remove(): void;
}

export function buildFirmwareProgram(): FirmwareProgram {
  const dir = mkdtempSync(join(tmpdir(), 'fringetally-wire-c-'));
  const binary = join(dir, 'wire_vectors');
  try {
    execFileSync('gcc', ['-std=c99', '-Wall', '-Wextra', '-Werror', '-pedantic', '-O2', '-o', binary, source], {
      stdio: ['ignore', 'pipe', 'pipe'],
    });
  } catch (error) {
    rmSync(dir, { recursive: true, force: true });
    const stderr = (error as { stderr?: Buffer }).stderr?.toString() ?? '';
    throw new Error(`gcc could not build ${source} (is gcc installed?):\n${stderr || (error as Error).message}`);
  }
  return {
    run(commands) {
      const output = execFileSync(binary, [], { input: `${commands.join('\n')}\n`, maxBuffer: 16 << 20 });
      return output.toString().trim().split('\n');
    },
    remove() {
      rmSync(dir, { recursive: true, force: true });
    },
  };
}
