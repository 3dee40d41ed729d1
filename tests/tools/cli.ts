// Runs the built command-line tool (npm test builds dist/ first) and reads its CSV outputs.
import { execFile } from 'node:child_process';
import { readFileSync } from 'node:fs';
import { fileURLToPath } from 'node:url';

const TOOL = fileURLToPath(new URL('../../dist/tools/fringetally.js', import.meta.url));

export interface CliResult {
  readonly code: number;
  readonly stdout: string;
  readonly stderr: string;
}

export function fringetally(args: readonly string[], cwd: string): Promise<CliResult> {
  return new Promise((resolve) => {
    execFile(process.execPath, [TOOL, ...args], { cwd, maxBuffer: 64 * 1024 * 1024 }, (error, stdout, stderr) => {
      const code = error === null ? 0 : typeof error.code === 'number' ? error.code : 1;
      resolve({ code, stdout, stderr });
    });
  });
}

/** Columns of a CSV file with a header line, `#` lines skipped, as strings. */
export function readCsv(path: string): Record<string, string[]> {
  const lines = readFileSync(path, 'utf8').split('\n').filter((line) => line !== '' && !line.startsWith('#'));
  const header = lines[0]!.split(',');
  const columns: Record<string, string[]> = Object.fromEntries(header.map((name) => [name, [] as string[]]));
  for (const line of lines.slice(1)) {
    const cells = line.split(',');
    header.forEach((name, k) => columns[name]!.push(cells[k] ?? ''));
  }
  return columns;
}

export const numbers = (values: readonly string[]) => values.map(Number);
