// Writes the embedded signal chain (src/core/embedded.ts) as one minified ES2020 script for embedded engines:
// an IIFE that sets the global `fringetally`. Fails when the file exceeds its 16 kB budget.
// Usage: node scripts/bundle-core.mjs [--outfile PATH]   (default dist/fringetally-core.min.js)
import { build } from 'esbuild';
import { mkdir, rename, writeFile } from 'node:fs/promises';
import { dirname, relative, resolve } from 'node:path';
import { fileURLToPath } from 'node:url';
import { parseArgs } from 'node:util';

/** Budget of the minified bundle in bytes: 16 kB, read as 16 000 bytes (SI kilo) so it holds under either reading. */
const BUDGET_BYTES = 16_000;

const root = resolve(dirname(fileURLToPath(import.meta.url)), '..');
const { values } = parseArgs({ options: { outfile: { type: 'string', default: 'dist/fringetally-core.min.js' } } });
const outfile = resolve(values.outfile);

/** The names an entry exports, as esbuild resolves them (re-exports included). */
async function exportNames(entry) {
  const result = await build({ absWorkingDir: root, entryPoints: [entry], bundle: true, format: 'esm', platform: 'neutral', write: false, metafile: true, outdir: 'unused', logLevel: 'warning' });
  return Object.values(result.metafile.outputs)[0].exports;
}

/** Minified IIFE of one entry, kept in memory. */
async function bundle(entry) {
  const names = (await exportNames(entry)).join(', ');
  const result = await build({
    absWorkingDir: root,
    // A plain object of the exports as the global: esbuild's globalName, or a namespace import, would add
    // its interop helpers and one getter per export (~500 bytes together).
    stdin: {
      contents: `import { ${names} } from './${entry}'; globalThis.fringetally = { ${names} };`,
      resolveDir: root,
      sourcefile: 'fringetally-core-entry.js',
      loader: 'js',
    },
    bundle: true,
    minify: true,
    format: 'iife',
    target: 'es2020',
    platform: 'neutral',
    charset: 'utf8',
    write: false,
    logLevel: 'warning',
  });
  return result.outputFiles[0].contents;
}

const [embedded, fullCore] = await Promise.all([bundle('src/core/embedded.ts'), bundle('src/core/index.ts')]);
await mkdir(dirname(outfile), { recursive: true });
// Written beside and renamed, so a reader (a test, another build) never sees half a file.
const partial = `${outfile}.${process.pid}.partial`;
await writeFile(partial, embedded);
await rename(partial, outfile);

const shown = relative(process.cwd(), outfile) || outfile;
console.log(`${shown}: ${embedded.byteLength} bytes (budget ${BUDGET_BYTES}); the full core (src/core/index.ts) would be ${fullCore.byteLength} bytes`);
if (embedded.byteLength > BUDGET_BYTES) {
  console.error(`${shown} is ${embedded.byteLength - BUDGET_BYTES} bytes over its ${BUDGET_BYTES}-byte budget: keep analysis, metrology and synthesis out of src/core/embedded.ts`);
  process.exitCode = 1;
}
