// The progress bar: on stderr when it is a terminal (here a pseudo-terminal from util-linux `script`), never in
// pipes or with --quiet.
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { execFileSync } from 'node:child_process';
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { fringetally } from './cli.js';

const TOOL = fileURLToPath(new URL('../../dist/tools/fringetally.js', import.meta.url));
let dir = '';
beforeAll(async () => {
  dir = mkdtempSync(join(tmpdir(), 'fringetally-progress-'));
  expect((await fringetally(['simulate', '--out', 'long.wav', '--duration-s', '0.6', '--quiet'], dir)).code).toBe(0);
});
afterAll(() => rmSync(dir, { recursive: true, force: true }));

/** Runs the tool with its stdio on a pseudo-terminal and returns what the terminal showed. */
function onTerminal(args: string): string {
  return execFileSync('script', ['-qec', `"${process.execPath}" "${TOOL}" ${args}`, '/dev/null'], { cwd: dir, encoding: 'utf8' });
}

describe('progress bar', () => {
  it('draws on a terminal, up to the whole file', () => {
    const screen = onTerminal('calibrate long.wav --out cal.json');
    expect(screen).toMatch(/fit long\.wav \[/);
    expect(screen).toMatch(/100% \| 600000\/600000 samples/);
  });

  it('stays silent with --quiet and when stderr is not a terminal', async () => {
    expect(onTerminal('calibrate long.wav --out cal2.json --quiet')).not.toMatch(/[\u2588\u2591]/); // no bar characters
    const piped = await fringetally(['calibrate', 'long.wav', '--out', 'cal3.json'], dir);
    expect(piped.code).toBe(0);
    expect(piped.stderr).not.toMatch(/[\u2588\u2591]|\d+% \|/); // no bar, no percentage of the file
    expect(piped.stderr).toContain('phase coverage'); // the summary goes to stderr (docs/cli.md)
    expect(piped.stdout).toBe('');
  });
});
