// The public surface: every name is listed once, by name, in the index of the folder that defines it (star
// re-exports pass on only such an index, so a helper shared inside a folder cannot leak), docs/api.md lists exactly those names, and what the modules export at run time matches.
import { describe, expect, it } from 'vitest';
import { readFileSync } from 'node:fs';
import { spawnSync } from 'node:child_process';
import * as root from '../src/index.js';
import * as core from '../src/core/index.js';
import * as accel from '../src/accel/index.js';
import * as stream from '../src/stream/index.js';
import * as io from '../src/io/index.js';
import * as embedded from '../src/core/embedded.js';

interface ApiName {
  readonly name: string;
  readonly kind: string;
  readonly file: string;
}
interface Report {
  readonly surface: readonly { readonly entry: string; readonly names: readonly ApiName[] }[];
  readonly stars: readonly string[];
  readonly page: string;
}

const run = spawnSync(process.execPath, ['scripts/api-surface.mjs', '--json'], { encoding: 'utf8', maxBuffer: 16 << 20 });
if (run.status !== 0) throw new Error(`scripts/api-surface.mjs failed: ${run.stderr}`);
const report = JSON.parse(run.stdout) as Report;
const entry = (name: string) => report.surface.find((item) => item.entry === name)!;

describe('public API', () => {
  it('lists every name explicitly: star re-exports pass on only a folder index, never a module', () => {
    expect(report.stars).toEqual([]);
  });

  it('docs/api.md lists exactly the exported names (regenerate it with npm run api-doc)', () => {
    expect(readFileSync('docs/api.md', 'utf8')).toBe(report.page);
  });

  it('exports at run time exactly the values the page lists, per entry point', () => {
    const modules: Record<string, object> = { fringetally: root, 'fringetally/core': core, 'fringetally/accel': accel, 'fringetally/stream': stream, 'fringetally/io': io };
    for (const [name, namespace] of Object.entries(modules)) {
      const values = entry(name).names.filter((item) => ['function', 'constant', 'class', 'enum'].includes(item.kind)).map((item) => item.name);
      expect(Object.keys(namespace).sort(), name).toEqual([...values].sort());
    }
  });

  it('keeps helpers shared inside a folder internal', () => {
    // Names that leaked through star re-exports before the surface was listed by name.
    const internal = ['pushAlarm', 'acceptFit', 'shiftMoments', 'momentIndex', 'calibrationOfSolution', 'coverageOfFit', 'checkFrameBlock', 'createScratch', 'parseClientMessage', 'feedUpdateMessage', 'tokenMatches', 'createVanishWatch', 'temporaryPathFor'];
    for (const { entry: name, names } of report.surface) {
      expect(names.map((item) => item.name).filter((item) => internal.includes(item)), name).toEqual([]);
    }
  });

  it('the package root is the core with the accelerated pipeline', () => {
    expect(entry('fringetally').names.map((item) => item.name)).toEqual(entry('fringetally/core').names.map((item) => item.name));
    expect(entry('fringetally').names.find((item) => item.name === 'createPipeline')!.file).toBe('src/accel/pipeline.ts');
    expect(root.createPipeline).not.toBe(core.createPipeline);
  });

  it('docs/embedded.md names exactly the values the embedded entry exports', () => {
    const table = readFileSync('docs/embedded.md', 'utf8').split('| group | exports |')[1]!.split('\n\n')[0]!;
    const documented = [...table.matchAll(/`(\w+)`/g)].map((match) => match[1]!);
    expect(documented.sort()).toEqual(Object.keys(embedded).sort());
  });
});
