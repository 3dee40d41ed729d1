// Bundles the compiled command-line tool (tsc's dist/tools/fringetally.js and the analysis worker it starts) into
// a few chunks in dist/tools/cli/, one or more per command, and makes the two files thin entries into them. Node
// spends most of a command's start-up resolving, reading and linking the ~100 small modules of its import graph
// (and rxjs's ~220): as a handful of chunks the same code starts in about half the time. `npm run build`,
// `npm test` and `npm ci` (prepare) run it after tsc; tsc alone rewrites the entries, so the tool then runs
// unbundled, never from a stale bundle.
// Usage: node scripts/bundle-cli.mjs
import { build } from 'esbuild';
import { chmod, readFile, rename, rm, stat, writeFile } from 'node:fs/promises';
import { createRequire } from 'node:module';
import { dirname, join, relative, resolve, sep } from 'node:path';
import { fileURLToPath } from 'node:url';

const root = resolve(dirname(fileURLToPath(import.meta.url)), '..');
const tools = join(root, 'dist', 'tools');
const out = join(tools, 'cli');
/** The entries: the tool and the worker of tools/analysis-worker-start.ts, which starts it by its file's URL. */
const entries = ['fringetally', 'capture-analysis-worker'];
/** First line after the shebang of a bundled entry: tsc writes the entries anew on every build, without it. */
const MARK = '// Entry into the bundle scripts/bundle-cli.mjs wrote in dist/tools/cli (tsc writes this file anew, without this line).';

/**
 * Packages left to Node: serialport loads a native addon, mqtt and ws are large CommonJS packages with optional
 * native parts, cli-progress is loaded through require. The others (rxjs, d3-scale) are bundled from their ES
 * modules, so that only the operators and scales the tool uses are read.
 */
const EXTERNAL = ['serialport', 'mqtt', 'ws', 'cli-progress'];

const entryPath = (name) => join(tools, `${name}.js`);
const firstLines = async (path) => (await readFile(path, 'utf8')).split('\n', 2).join('\n');
if ((await firstLines(entryPath(entries[0]))).includes(MARK)) {
  // Only tsc changes dist/, and tsc would have rewritten the entry: the bundle in dist/tools/cli is current.
  console.log('dist/tools/cli: the bundle is current (the entries are still its own)');
  process.exit(0);
}

/**
 * `import.meta.url` keeps naming the module's tsc output (dist/tools/cli-kit.js, dist/tools/commands/demo.js, ...)
 * from inside a chunk of dist/tools/cli, so that the files found beside a module (package.json, the demo capture,
 * the worker's entry) are the same bundled or not.
 */
const moduleUrls = {
  name: 'module-urls',
  setup(pluginBuild) {
    pluginBuild.onLoad({ filter: /\.js$/ }, async (args) => {
      if (!args.path.startsWith(join(root, 'dist') + sep)) return undefined;
      const source = await readFile(args.path, 'utf8');
      if (!source.includes('import.meta.url')) return undefined;
      const path = relative(out, args.path).split(sep).join('/');
      return { contents: source.replaceAll('import.meta.url', `new URL(${JSON.stringify(path)}, import.meta.url).href`), loader: 'js' };
    });
  },
};

const require = createRequire(join(root, 'package.json'));
const partial = `${out}.${process.pid}.partial`;
const result = await build({
  absWorkingDir: root,
  entryPoints: Object.fromEntries(entries.map((name) => [name, entryPath(name)])),
  outdir: partial,
  chunkNames: '[name]-[hash]',
  bundle: true,
  splitting: true,
  format: 'esm',
  platform: 'node',
  target: 'node20',
  external: EXTERNAL,
  // rxjs's package exports send Node to its CommonJS build; its ES2015 modules are the same code, tree-shakeable.
  alias: { rxjs: join(dirname(require.resolve('rxjs/package.json')), 'dist', 'esm', 'index.js') },
  plugins: [moduleUrls],
  sourcemap: 'linked',
  metafile: true,
  logLevel: 'warning',
});
// The new chunks replace the old at once; then the entries point into them.
await rm(out, { recursive: true, force: true });
await rename(partial, out);
for (const name of entries) {
  const path = entryPath(name);
  const shebang = (await firstLines(path)).startsWith('#!') ? '#!/usr/bin/env node\n' : '';
  const { mode } = await stat(path);
  await writeFile(`${path}.partial`, `${shebang}${MARK}\nimport './cli/${name}.js';\n`, { mode });
  await rename(`${path}.partial`, path);
  await chmod(path, mode);
}

const outputs = Object.entries(result.metafile.outputs).filter(([file]) => file.endsWith('.js'));
const bytes = outputs.reduce((sum, [, output]) => sum + output.bytes, 0);
console.log(`dist/tools/cli: ${outputs.length} chunks, ${bytes} bytes, from ${Object.keys(result.metafile.inputs).length} modules`);
