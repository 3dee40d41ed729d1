// Where text goes (results to --out or stdout, everything about the run to stderr), a closed pipe, the status line
// at any terminal width, and outputs on a full disk: written whole or not at all.
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { execFileSync, spawnSync } from 'node:child_process';
import { mkdtempSync, readdirSync, readFileSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { fitToWidth } from '../../tools/live/status-line.js';
import { fringetally } from './cli.js';

const TOOL = fileURLToPath(new URL('../../dist/tools/fringetally.js', import.meta.url));
let dir = '';
const optics = ['--wavelength-nm', '632.9908', '--fold', '2'];

beforeAll(async () => {
  dir = mkdtempSync(join(tmpdir(), 'fringetally-streams-'));
  expect((await fringetally(['simulate', '--out', 'cap.wav', '--duration-s', '0.02', '--quiet'], dir)).code).toBe(0);
});
afterAll(() => rmSync(dir, { recursive: true, force: true }));

describe('one rule for the streams', () => {
  it('calibrate, simulate and replay put their summaries on stderr; stdout carries only results', async () => {
    const calibrated = await fringetally(['calibrate', 'cap.wav', '--out', 'cal.json'], dir);
    expect(calibrated.code).toBe(0);
    expect(calibrated.stdout).toBe('');
    expect(calibrated.stderr).toContain('phase coverage');
    const simulated = await fringetally(['simulate', '--out', 'other.csv', '--duration-s', '0.001'], dir);
    expect(simulated.stdout).toBe('');
    expect(simulated.stderr).toContain('wrote other.csv');
    const replayed = await fringetally(['replay', 'cap.wav', ...optics, '--calibration', 'cal.json', '--out', '-', '--format', 'csv'], dir);
    expect(replayed.code).toBe(0);
    expect(replayed.stdout.split('\n')[0]).toBe('t,position_m,velocity_m_s,level,alarms');
    expect(replayed.stdout.trim().split('\n')).toHaveLength(20_001); // header and every row, nothing else
    expect(replayed.stderr).toContain('wrote 20000 rows to standard output');
  });

  it('ends quietly when the reader closes the pipe', () => {
    // bash reports each side's exit code; head takes one line and leaves.
    const script = `"${process.execPath}" "${TOOL}" replay cap.wav ${optics.join(' ')} --calibration cal.json --out - --format csv 2>err.txt | head -n 1; echo "codes \${PIPESTATUS[*]}"`;
    const output = execFileSync('bash', ['-c', script], { cwd: dir, encoding: 'utf8' });
    expect(output).toContain('t,position_m,velocity_m_s,level,alarms');
    expect(output).toContain('codes 0 0');
    expect(readFileSync(join(dir, 'err.txt'), 'utf8')).not.toMatch(/EPIPE|Error/);
    const air = `"${process.execPath}" "${TOOL}" air --temperature-c 20 --pressure-pa 101325 --humidity-pct 50 --wavelength-nm 633 2>air-err.txt | head -c 10 >/dev/null; echo "codes \${PIPESTATUS[*]}"`;
    expect(execFileSync('bash', ['-c', air], { cwd: dir, encoding: 'utf8' })).toContain('codes 0 0');
    expect(readFileSync(join(dir, 'air-err.txt'), 'utf8')).toBe('');
  });
});

describe('status line width', () => {
  it('keeps the whole text when the terminal reports no width, and one column free otherwise', () => {
    const text = 'link up | 12.3456 µm | gaps 0';
    expect(fitToWidth(text, 0)).toBe(text);
    expect(fitToWidth(text, undefined)).toBe(text);
    expect(fitToWidth(text, 1)).toBe(text);
    expect(fitToWidth(text, 10)).toBe(text.slice(0, 9));
    expect(fitToWidth(text, text.length)).toBe(text.slice(0, text.length - 1));
    expect(fitToWidth(text, text.length + 1)).toBe(text);
  });
});

describe('a full disk', () => {
  // A 64 KiB tmpfs in a user and mount namespace of its own (no privileges needed): results, reports and calibration
  // files that do not fit fail with the path named, exit 1, and leave no file, partial or final, behind.
  it('fails with the path named and leaves nothing behind', () => {
    const tool = `"${process.execPath}" "${TOOL}"`;
    const script = [
      'set -u',
      'mkdir -p full',
      'mount -t tmpfs -o size=64k tmpfs full',
      `${tool} replay cap.wav ${optics.join(' ')} --calibration cal.json --out full/rows.csv --quiet 2>full-rows.txt; echo "rows $?"`,
      `${tool} replay cap.wav ${optics.join(' ')} --calibration cal.json --every 1000 --out full/small.csv --report full/report.html --quiet 2>full-report.txt; echo "report $?"`,
      // Fill the disk, then a small calibration file cannot be written either.
      'head -c 70000 /dev/zero > full/filler 2>/dev/null; true',
      `${tool} calibrate cap.wav --out full/cal.json --quiet 2>full-cal.txt; echo "cal $?"`,
      'rm -f full/filler',
      'echo "left: $(ls -A full | tr "\\n" " ")"',
    ].join('\n');
    const run = spawnSync('unshare', ['-rm', 'bash', '-c', script], { cwd: dir, encoding: 'utf8' });
    expect(run.status, run.stderr).toBe(0);
    expect(run.stdout).toContain('rows 1');
    expect(run.stdout).toContain('report 1');
    expect(run.stdout).toContain('cal 1');
    // The small result fitted and stays; nothing else, and no temporary file.
    expect(run.stdout).toMatch(/left: small\.csv \n/);
    expect(readFileSync(join(dir, 'full-rows.txt'), 'utf8')).toContain('full/rows.csv: cannot write the output (the disk is full)');
    expect(readFileSync(join(dir, 'full-report.txt'), 'utf8')).toContain('full/report.html: cannot write the output (the disk is full)');
    expect(readFileSync(join(dir, 'full-cal.txt'), 'utf8')).toContain('full/cal.json: cannot write the output (the disk is full)');
    expect(readdirSync(dir).filter((name) => name.includes('partial'))).toEqual([]);
  });
});
