// The list of subcommands; each lives in its own file in this folder.
import type { Command } from '../cli-kit.js';
import { air } from './air.js';
import { calibrate } from './calibrate.js';
import { demo } from './demo.js';
import { emulate } from './emulate.js';
import { listen } from './listen.js';
import { replay } from './replay.js';
import { simulate } from './simulate.js';

export const commands: readonly Command[] = [simulate, calibrate, replay, listen, emulate, air, demo];
