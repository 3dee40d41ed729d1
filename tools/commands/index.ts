// The list of subcommands; each lives in its own file in this folder.
import type { Command } from '../cli-kit.js';

export const commands: readonly Command[] = [];
