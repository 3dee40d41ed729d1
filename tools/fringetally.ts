#!/usr/bin/env node
// Entry point of the `fringetally` command-line tool: dispatches to one subcommand per file in tools/commands.
import { readFileSync } from 'node:fs';
import { commands } from './commands/index.js';
import { LASER_CAUTION, UsageError } from './cli-kit.js';

function version(): string {
  const pkg = JSON.parse(readFileSync(new URL('../../package.json', import.meta.url), 'utf8')) as { version: string };
  return pkg.version;
}

function overview(): string {
  const width = Math.max(8, ...commands.map((command) => command.name.length));
  const lines = commands.map((command) => `  ${command.name.padEnd(width)}  ${command.summary}`);
  return [
    'fringetally: fringe counting for homodyne displacement interferometers',
    '',
    'Usage: fringetally <command> [options]     fringetally <command> --help',
    '',
    'Commands:',
    ...lines,
    '',
    'Options:',
    '  --help       this text',
    '  --version    the version of fringetally',
    '',
    LASER_CAUTION,
  ].join('\n');
}

async function main(argv: readonly string[]): Promise<number> {
  const [first, ...rest] = argv;
  if (first === undefined || first === '--help' || first === '-h' || first === 'help') {
    process.stdout.write(overview() + '\n');
    return 0;
  }
  if (first === '--version' || first === '-v') {
    process.stdout.write(version() + '\n');
    return 0;
  }
  const entry = commands.find((candidate) => candidate.name === first);
  if (entry === undefined) {
    process.stderr.write(`fringetally: unknown command "${first}"; see fringetally --help\n`);
    return 2;
  }
  const command = await entry.load();
  if (rest.includes('--help') || rest.includes('-h')) {
    process.stdout.write(command.help + '\n');
    return 0;
  }
  try {
    return await command.run(rest);
  } catch (error) {
    if (error instanceof UsageError) {
      process.stderr.write(`fringetally ${command.name}: ${error.message}\nSee fringetally ${command.name} --help\n`);
      return 2;
    }
    process.stderr.write(`fringetally ${command.name}: ${(error as Error).message}\n`);
    return 1;
  }
}

process.exitCode = await main(process.argv.slice(2));
