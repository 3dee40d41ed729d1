#!/usr/bin/env node
// Entry point of the `fringetally` command-line tool: dispatches to one subcommand per file in tools/commands.
import { commands } from './commands/index.js';
import { LASER_CAUTION, toolVersion, UsageError } from './cli-kit.js';

// A reader that closes the pipe (`fringetally ... | head`) has had what it wanted: the tool stops quietly, exit 0,
// instead of dying on "write EPIPE". Other output errors still fail the command.
let stdoutClosed = false;
process.stdout.on('error', (error: NodeJS.ErrnoException) => {
  if (error.code !== 'EPIPE') throw error;
  stdoutClosed = true;
});
const isClosedPipe = (error: unknown) => stdoutClosed && (error as NodeJS.ErrnoException).code === 'EPIPE';

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
    process.stdout.write(toolVersion() + '\n');
    return 0;
  }
  const entry = commands.find((candidate) => candidate.name === first);
  if (entry === undefined) {
    process.stderr.write(`fringetally: unknown command "${first}"; see fringetally --help\n`);
    return 2;
  }
  const helpOnly = rest.includes('--help') || rest.includes('-h');
  // Started, not awaited: it only saves time. Should it fail, the command meets the same failure itself, in its place.
  // The help needs nothing started.
  if (!helpOnly) entry.prepare?.().catch(() => undefined);
  const command = await entry.load();
  if (helpOnly) {
    process.stdout.write(command.help + '\n');
    return 0;
  }
  try {
    const code = await command.run(rest);
    return stdoutClosed ? 0 : code;
  } catch (error) {
    if (isClosedPipe(error)) return 0;
    if (error instanceof UsageError) {
      process.stderr.write(`fringetally ${command.name}: ${error.message}\nSee fringetally ${command.name} --help\n`);
      return 2;
    }
    // Exit codes (docs/cli.md): 2 the command line is wrong, 1 the work failed (files, devices, data).
    process.stderr.write(`fringetally ${command.name}: ${(error as Error).message}\n`);
    return 1;
  }
}

process.exitCode = await main(process.argv.slice(2));
