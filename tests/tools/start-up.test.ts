// What a command loads before it works: its modules may pull in only the packages it uses, since each costs start-up
// time on every run (rxjs's CommonJS build alone is ~220 files, mqtt ~100). And the bundled tool (npm test bundles
// dist/tools, scripts/bundle-cli.mjs) must find the files beside its modules as the unbundled one does.
import { spawnSync } from 'node:child_process';
import { existsSync, mkdtempSync, readFileSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join, resolve } from 'node:path';
import { pathToFileURL } from 'node:url';
import { afterAll, describe, expect, it } from 'vitest';
import { fringetally } from './cli.js';

/**
 * Imports one module in a fresh process and prints the packages whose modules Node resolved meanwhile (a resolve
 * hook on the loader's thread posts each URL back).
 */
const PACKAGES_LOADED = `
import { register } from 'node:module';
const urls = [];
const { port1, port2 } = new MessageChannel();
port1.on('message', (url) => urls.push(url));
port1.unref();
const hook = 'let port; export function initialize(data) { port = data.port; }' +
  'export async function resolve(specifier, context, next) { const result = await next(specifier, context); port.postMessage(result.url); return result; }';
register('data:text/javascript,' + encodeURIComponent(hook), { data: { port: port2 }, transferList: [port2] });
await import(process.argv[1]);
await new Promise((done) => setTimeout(done, 100));
const names = urls.map((url) => /\\/node_modules\\/((?:@[^/]+\\/)?[^/]+)\\//.exec(url)?.[1]).filter((name) => name !== undefined);
process.stdout.write(JSON.stringify([...new Set(names)].sort()));
`;

function packagesLoadedBy(module: string): string[] {
  const child = spawnSync(process.execPath, ['--input-type=module', '-e', PACKAGES_LOADED, pathToFileURL(resolve(module)).href], { encoding: 'utf8' });
  expect(child.stderr).toBe('');
  return JSON.parse(child.stdout) as string[];
}

/** Packages the bundle leaves to Node (scripts/bundle-cli.mjs EXTERNAL): seen as such bundled or not. */
const EXTERNAL = ['cli-progress', 'mqtt', 'serialport', 'ws'];

/** The external packages the tool resolves for `fringetally <command> --help`, through its real entry point. */
function externalPackagesOfHelp(command: string): string[] {
  const hook = "import { writeSync } from 'node:fs'; export async function resolve(specifier, context, next) { const result = await next(specifier, context); writeSync(2, 'resolved ' + result.url + '\\n'); return result; }";
  const preload = `import { register } from 'node:module'; register(${JSON.stringify(`data:text/javascript,${encodeURIComponent(hook)}`)});`;
  const child = spawnSync(process.execPath, ['--import', `data:text/javascript,${encodeURIComponent(preload)}`, 'dist/tools/fringetally.js', command, '--help'], { encoding: 'utf8' });
  expect(child.status).toBe(0);
  const names = [...child.stderr.matchAll(/^resolved .*\/node_modules\/((?:@[^/]+\/)?[^/]+)\//gm)].map((match) => match[1]!);
  return [...new Set(names)].filter((name) => EXTERNAL.includes(name)).sort();
}

const D3 = ['d3-array', 'd3-color', 'd3-format', 'd3-interpolate', 'd3-scale', 'd3-time', 'd3-time-format'];

describe('start-up', () => {
  // The compiled modules (tsc's output, also under a bundled tool): a command loads its module's static graph.
  it('each command loads only the packages it uses', () => {
    const expected: Record<string, string[]> = {
      simulate: [],
      calibrate: [],
      replay: [],
      listen: ['rxjs', 'serialport'],
      emulate: ['rxjs', 'serialport'],
      air: [],
      spectrum: D3,
      positioning: D3,
      angles: [],
      demo: [],
    };
    const loaded = Object.fromEntries(Object.keys(expected).map((name) => [name, packagesLoadedBy(`dist/tools/commands/${name}.js`)]));
    expect(loaded).toEqual(expected);
    // The entry and its command list load no package before the command is chosen.
    expect(packagesLoadedBy('dist/tools/commands/index.js')).toEqual([]);
    expect(packagesLoadedBy('dist/tools/cli-kit.js')).toEqual([]);
  }, 120_000);

  // The same through the tool's entry, bundled or not: a shared chunk must not bring a package to a command.
  it('the tool resolves for a command only the packages that command uses', () => {
    const loaded = Object.fromEntries(['replay', 'calibrate', 'listen', 'emulate', 'air'].map((command) => [command, externalPackagesOfHelp(command)]));
    expect(loaded).toEqual({ replay: [], calibrate: [], listen: ['serialport'], emulate: ['serialport'], air: [] });
  }, 120_000);

  const dir = mkdtempSync(join(tmpdir(), 'fringetally-start-up-'));
  afterAll(() => rmSync(dir, { recursive: true, force: true }));

  it('finds the files beside its modules: package.json for --version, the demo capture', async () => {
    const version = await fringetally(['--version'], dir);
    expect(version).toEqual({ code: 0, stdout: `${(JSON.parse(readFileSync('package.json', 'utf8')) as { version: string }).version}\n`, stderr: '' });
    const demo = await fringetally(['demo', '--out-dir', join(dir, 'demo')], dir);
    expect(demo.code).toBe(0);
    expect(demo.stdout).toContain('demo/stage-reversals.wav');
    for (const file of ['cal.json', 'result.csv', 'report.html']) expect(existsSync(join(dir, 'demo', file))).toBe(true);
  }, 120_000);
});
