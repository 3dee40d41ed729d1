// The public surface of each package entry point, read from the sources with the TypeScript compiler, and the
// reference page docs/api.md rendered from it. `npm run api-doc` rewrites the page; tests/api-surface.test.ts fails
// when the page and the exports disagree, so a name cannot leave or enter the surface unnoticed.
import { readFileSync, writeFileSync } from 'node:fs';
import { dirname, join, relative } from 'node:path';
import { fileURLToPath } from 'node:url';
import ts from 'typescript';

const ROOT = join(dirname(fileURLToPath(import.meta.url)), '..');

/** Package entry points (package.json "exports") and the source file behind each. */
export const ENTRY_POINTS = [
  ['fringetally', 'src/index.ts'],
  ['fringetally/core', 'src/core/index.ts'],
  ['fringetally/accel', 'src/accel/index.ts'],
  ['fringetally/stream', 'src/stream/index.ts'],
  ['fringetally/io', 'src/io/index.ts'],
];

function kindOf(symbol) {
  const f = ts.SymbolFlags;
  if (symbol.flags & f.Class) return 'class';
  if (symbol.flags & f.Function) return 'function';
  if (symbol.flags & f.Interface) return 'interface';
  if (symbol.flags & f.TypeAlias) return 'type';
  if (symbol.flags & f.Enum) return 'enum';
  if (symbol.flags & f.Variable) return 'constant';
  return 'other';
}

/** The first sentence of a declaration's doc comment, on one line. */
function summaryOf(symbol, checker) {
  const text = ts.displayPartsToString(symbol.getDocumentationComment(checker)).replace(/\s+/g, ' ').trim();
  const end = text.search(/\.(\s|$)/);
  return end < 0 ? text : text.slice(0, end + 1);
}

/** For each entry point: its exported names with kind, defining file and summary, sorted by name. */
export function apiSurface() {
  const config = ts.getParsedCommandLineOfConfigFile(join(ROOT, 'tsconfig.json'), {}, { ...ts.sys, onUnRecoverableConfigFileDiagnostic() {} });
  const program = ts.createProgram(ENTRY_POINTS.map(([, file]) => join(ROOT, file)), config.options);
  const checker = program.getTypeChecker();
  return ENTRY_POINTS.map(([entry, file]) => {
    const moduleSymbol = checker.getSymbolAtLocation(program.getSourceFile(join(ROOT, file)));
    const names = checker.getExportsOfModule(moduleSymbol).map((exported) => {
      const symbol = exported.flags & ts.SymbolFlags.Alias ? checker.getAliasedSymbol(exported) : exported;
      const declaration = symbol.declarations?.[0];
      return {
        name: exported.name,
        kind: kindOf(symbol),
        file: declaration === undefined ? '' : relative(ROOT, declaration.getSourceFile().fileName),
        summary: summaryOf(symbol, checker),
      };
    });
    names.sort((a, b) => (a.name < b.name ? -1 : a.name > b.name ? 1 : 0));
    return { entry, file, names };
  });
}

/**
 * Star re-exports of anything but a folder's index, in an entry point or in any index it uses. Each name is listed
 * once, in the index of the folder that defines it; an entry point may pass a folder's index on whole.
 */
export function starExports() {
  const found = [];
  const seen = new Set();
  const visit = (file) => {
    if (seen.has(file)) return;
    seen.add(file);
    const text = readFileSync(join(ROOT, file), 'utf8');
    for (const match of text.matchAll(/^export \* from '(.+)';/gm)) {
      if (!match[1].endsWith('/index.js')) found.push(`${file}: ${match[0]}`);
    }
    for (const match of text.matchAll(/from '(\.[^']*index\.js)'/g)) visit(join(dirname(file), match[1]).replace(/\.js$/, '.ts'));
  };
  for (const [, file] of ENTRY_POINTS) visit(file);
  return found;
}

export function renderApiPage(surface = apiSurface()) {
  const lines = [
    '# The public API, entry point by entry point',
    '',
    'Everything a program can import from the package, listed by name; nothing else is public (helpers shared',
    'inside a folder stay internal and may change). The page is generated from the sources (`npm run api-doc`) and a',
    'test fails when it and the exports disagree. Each line gives the kind, the name, the first sentence of its doc',
    'comment and the file that defines it; the guides in this folder show how the pieces fit together.',
    '',
    '`fringetally` is the core with the accelerated `createPipeline` (the fastest exact front end by default);',
    '`fringetally/core` is the same core with the plain pipeline, the part that also runs on embedded engines.',
    '',
  ];
  const core = surface.find(({ entry }) => entry === 'fringetally/core');
  const sameAsCore = (names) => core !== undefined && names.map(({ name }) => name).join() === core.names.map(({ name }) => name).join();
  for (const { entry, names } of surface) {
    lines.push(`## \`${entry}\` (${names.length} names)`, '');
    if (entry === 'fringetally' && sameAsCore(names)) {
      const pipeline = names.find(({ name }) => name === 'createPipeline');
      lines.push(`The same names as \`fringetally/core\`, with \`createPipeline\` from ${pipeline?.file ?? 'the accel layer'}.`, '');
      continue;
    }
    for (const { name, kind, file, summary } of names) {
      lines.push(`- ${kind} \`${name}\`${summary === '' ? '' : ` — ${summary}`} (${file})`);
    }
    lines.push('');
  }
  return lines.join('\n');
}

if (process.argv[1] === fileURLToPath(import.meta.url)) {
  const surface = apiSurface();
  if (process.argv.includes('--json')) {
    // For the test: the surface, any star re-exports, and the page as it should read.
    process.stdout.write(JSON.stringify({ surface, stars: starExports(), page: renderApiPage(surface) }));
  } else {
    writeFileSync(join(ROOT, 'docs/api.md'), renderApiPage(surface));
    console.log('docs/api.md written');
  }
}
