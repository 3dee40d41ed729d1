// The environment log: linear interpolation between readings (values hand-worked from the invented readings
// below), held outside them, the reader's errors naming the file and line, and a log followed as it grows.
import { appendFileSync, mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { createEnvironmentSchedule } from '../../src/core/index.js';
import { parseEnvironmentLog } from '../../src/io/capture/index.js';
import { followEnvironmentLog } from '../../src/io/live/index.js';
import { until } from '../serial/wait.js';

describe('environment schedule', () => {
  const log = parseEnvironmentLog('t,temperature,pressure,humidity,co2\n0,20,101000,40,400\n10,22,101100,50,500\n30,21,101100,50,600\n', 'air.log');

  it('interpolates linearly between readings and holds the first and last outside them', () => {
    expect(log.hasCo2).toBe(true);
    // A quarter of the way from t = 0 to 10: 20 + 0.25·2, 101000 + 0.25·100, 40 + 0.25·10, 400 + 0.25·100.
    expect(log.at(2.5)).toEqual({ tS: 2.5, temperatureC: 20.5, pressurePa: 101025, relativeHumidityPct: 42.5, co2Ppm: 425 });
    expect(log.at(20)).toMatchObject({ temperatureC: 21.5, co2Ppm: 550 });
    expect(log.at(-5)).toMatchObject({ tS: 0, temperatureC: 20 });
    expect(log.at(99)).toMatchObject({ tS: 30, temperatureC: 21 });
    // Asked out of order, the same answers.
    expect(log.at(2.5).temperatureC).toBe(20.5);
  });

  it('reads a log without CO2 as NaN, columns in any order, comments and blank lines skipped', () => {
    const plain = parseEnvironmentLog('# sensor A\n\nhumidity,pressure,temperature,t\r\n45,100000,19.5,0\r\n', 'plain.log');
    expect(plain.hasCo2).toBe(false);
    expect(plain.at(0)).toEqual({ tS: 0, temperatureC: 19.5, pressurePa: 100000, relativeHumidityPct: 45, co2Ppm: Number.NaN });
  });

  it('names the file and line of a bad header, field count or value', () => {
    expect(() => parseEnvironmentLog('t,temp,pressure,humidity\n', 'a.log')).toThrow(
      'a.log line 1: expected a header naming the columns t,temperature,pressure,humidity[,co2], got "t,temp,pressure,humidity"',
    );
    expect(() => parseEnvironmentLog('t,temperature,pressure,humidity\n0,20,101000\n', 'b.log')).toThrow('b.log line 2: expected 4 numbers (t,temperature,pressure,humidity), got "0,20,101000"');
    expect(() => parseEnvironmentLog('t,temperature,pressure,humidity\n', 'c.log')).toThrow('c.log line 2: expected at least one reading after the header');
  });

  it('the schedule checks its readings, naming the record', () => {
    const reading = { tS: 0, temperatureC: 20, pressurePa: 101325, relativeHumidityPct: 50, co2Ppm: Number.NaN };
    expect(() => createEnvironmentSchedule([])).toThrow('records must be at least one reading (got 0)');
    expect(() => createEnvironmentSchedule([reading, { ...reading, tS: 0 }])).toThrow('records[1].tS must be greater than records[0].tS = 0 (got 0)');
    expect(() => createEnvironmentSchedule([reading, { ...reading, tS: 1, co2Ppm: 400 }])).toThrow('records[1].co2Ppm must be NaN (the first reading has no CO2) (got 400)');
  });
});

describe('followEnvironmentLog', () => {
  it('gives the readings now and again as the file grows; a line without its newline waits for it', async () => {
    const dir = mkdtempSync(join(tmpdir(), 'fringetally-follow-'));
    try {
      const path = join(dir, 'air.csv');
      writeFileSync(path, 't,temperature,pressure,humidity\n0,20,101325,50\n1,21');
      const seen: number[][] = [];
      const subscription = followEnvironmentLog(path, { intervalMs: 10 }).subscribe((schedule) => seen.push(schedule.records.map((record) => record.tS)));
      try {
        await until(() => seen.length === 1, 'the first schedule');
        appendFileSync(path, ',101325,50\n2,22,101325,50\n');
        await until(() => seen.length === 2, 'the grown schedule');
        expect(seen).toEqual([[0], [0, 1, 2]]);
        appendFileSync(path, '1.5,22,101325,50\n');
        const failure = await new Promise<Error>((resolve) => followEnvironmentLog(path, { intervalMs: 10 }).subscribe({ error: resolve }));
        expect(failure.message).toBe(`${path} line 5: expected t greater than the line before (2 s), got "1.5"`);
      } finally {
        subscription.unsubscribe();
      }
    } finally {
      rmSync(dir, { recursive: true, force: true });
    }
  });
});
