// The list of subcommands; each lives in its own file in this folder.
import type { Command } from '../cli-kit.js';
import { air } from './air.js';

export const commands: readonly Command[] = [air];
