// The command list loads each subcommand on demand; its names and summaries must be the modules' own.
import { describe, expect, it } from 'vitest';
import { commands } from '../../tools/commands/index.js';

describe('command list', () => {
  it('each entry loads its command, whose name and summary are the entry\'s', async () => {
    expect(commands.map((entry) => entry.name)).toEqual(['simulate', 'calibrate', 'replay', 'listen', 'emulate', 'air', 'spectrum', 'positioning', 'angles', 'demo']);
    for (const entry of commands) {
      const command = await entry.load();
      expect({ name: command.name, summary: command.summary }).toEqual({ name: entry.name, summary: entry.summary });
    }
  });
});
