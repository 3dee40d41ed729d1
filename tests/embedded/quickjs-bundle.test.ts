// The embedded bundle (scripts/bundle-core.mjs) run inside QuickJS on the demo capture (an invented scenario, int16
// at 1 MHz, with a beam interruption) must give exactly what the TypeScript sources give under Node: same fit, same
// positions, velocities, levels, flags and alarm events, compared with Object.is (bit for bit; NaN equals NaN).
// The same chain source runs in both engines, so only the engine and the bundling differ.
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { spawnSync, type SpawnSyncReturns } from 'node:child_process';
import { mkdtempSync, readFileSync, rmSync, statSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { performance } from 'node:perf_hooks';
import { newQuickJSWASMModuleFromVariant, type QuickJSContext, type QuickJSHandle, type QuickJSRuntime } from 'quickjs-emscripten-core';
import * as core from '../../src/core/embedded.js';
import { openCapture } from '../../src/io/capture/index.js';

/** The budget, "at most 16 kB minified", read as 16 000 bytes. */
const BUDGET_BYTES = 16_000;
const BLOCK_SIZE = 4096;
/** Runs per engine for the speed figure: V8 needs a few to warm up its JIT, the QuickJS interpreter does not. */
const NODE_RUNS = 10;
const QUICKJS_RUNS = 3;

/**
 * Body of `(core, x, y, setup) => result`, evaluated as is by both engines: fit the ellipse over the whole
 * capture, then run the pipeline block by block. Typed arrays come back as they are; the events as JSON for
 * their integer and text fields, and their values in a Float64Array so none is re-parsed from decimal text.
 */
const CHAIN_BODY = `
  const fit = core.createEllipseAccumulator();
  fit.add(x, y, x.length);
  const result = fit.solve();
  if (!result.ok) throw new Error('ellipse fit failed: ' + result.message);
  const c = result.calibration;
  const pipeline = core.createPipeline({
    rateHz: setup.rateHz,
    wavelengthM: setup.wavelengthM,
    fold: setup.fold,
    refractiveIndex: setup.refractiveIndex,
    adc: { kind: 'int16' },
    calibration: c,
    blockCapacity: setup.blockSize,
  });
  const n = x.length;
  const positionM = new Float64Array(n);
  const velocityMS = new Float64Array(n);
  const level = new Float32Array(n);
  const flags = new Uint8Array(n);
  const events = [];
  for (let start = 0; start < n; start += setup.blockSize) {
    const end = Math.min(n, start + setup.blockSize);
    pipeline.process(x.subarray(start, end), y.subarray(start, end), end - start, {
      positionM: positionM.subarray(start, end),
      velocityMS: velocityMS.subarray(start, end),
      level: level.subarray(start, end),
      flags: flags.subarray(start, end),
    }, events);
  }
  return {
    fit: Float64Array.of(c.offsetX, c.offsetY, c.amplitudeX, c.amplitudeY, c.phaseErrorRad, result.residualRms, result.coverage),
    positionM,
    velocityMS,
    level,
    flags,
    eventValues: Float64Array.from(events, (event) => event.value),
    events: JSON.stringify(events.map((event) => [event.sampleIndex, event.kind, event.state])),
  };
`;

interface ChainResult {
  readonly fit: Float64Array;
  readonly positionM: Float64Array;
  readonly velocityMS: Float64Array;
  readonly level: Float32Array;
  readonly flags: Uint8Array;
  readonly eventValues: Float64Array;
  readonly events: string;
}

interface Setup {
  readonly rateHz: number;
  readonly wavelengthM: number;
  readonly fold: number;
  readonly refractiveIndex: number;
  readonly blockSize: number;
}

const runInNode = new Function('core', 'x', 'y', 'setup', CHAIN_BODY) as (
  chainCore: typeof core,
  x: Int16Array,
  y: Int16Array,
  setup: Setup,
) => ChainResult;

/** Where the two runs differ, as `name[index]: node vs quickjs` lines (at most 5); empty when identical. */
function differences(name: string, node: ArrayLike<number>, quickjs: ArrayLike<number>): string[] {
  if (node.length !== quickjs.length) return [`${name}: length ${node.length} vs ${quickjs.length}`];
  const found: string[] = [];
  for (let i = 0; i < node.length && found.length < 5; i++) {
    if (!Object.is(node[i], quickjs[i])) found.push(`${name}[${i}]: ${node[i]} vs ${quickjs[i]}`);
  }
  return found;
}

/** The first call's result, its wall-clock time and the best of `runs` calls, in ms. */
function timed<T>(runs: number, run: () => T): { result: T; firstMs: number; bestMs: number } {
  const start = performance.now();
  const result = run();
  const firstMs = performance.now() - start;
  let bestMs = firstMs;
  for (let i = 1; i < runs; i++) {
    const again = performance.now();
    run();
    bestMs = Math.min(bestMs, performance.now() - again);
  }
  return { result, firstMs, bestMs };
}

const outDir = mkdtempSync(join(tmpdir(), 'fringetally-embedded-'));
const bundlePath = join(outDir, 'fringetally-core.min.js');
let build: SpawnSyncReturns<string>;
let runtime: QuickJSRuntime;
let vm: QuickJSContext;
let x: Int16Array;
let y: Int16Array;
let setup: Setup;

beforeAll(async () => {
  // The real script, as `npm run bundle:core` runs it, into a private file so that parallel runs never share one.
  build = spawnSync(process.execPath, ['scripts/bundle-core.mjs', '--outfile', bundlePath], { encoding: 'utf8' });
  // The dynamic import is the form the library documents; a default import types as the CommonJS module object.
  const quickjs = await newQuickJSWASMModuleFromVariant(import('@jitl/quickjs-wasmfile-release-sync'));
  runtime = quickjs.newRuntime();
  vm = runtime.newContext();
  evalIn(readFileSync(bundlePath, 'utf8'), () => undefined);

  const capture = await openCapture('demo/stage-reversals.wav');
  const total = capture.info.totalSamples!;
  x = new Int16Array(total);
  y = new Int16Array(total);
  for await (const block of capture.blocks()) {
    x.set(block.x.subarray(0, block.length), block.firstIndex);
    y.set(block.y.subarray(0, block.length), block.firstIndex);
  }
  const meta = capture.info.metadata;
  setup = {
    rateHz: capture.info.rateHz,
    wavelengthM: Number(meta.get('wavelength_nm')) * 1e-9,
    fold: Number(meta.get('fold')),
    refractiveIndex: Number(meta.get('refractive_index')),
    blockSize: BLOCK_SIZE,
  };
});

afterAll(() => {
  vm?.dispose();
  runtime?.dispose();
  rmSync(outDir, { recursive: true, force: true });
});

/** Evaluates `code` in the VM and hands its value to `read`, disposing the handle either way. */
function evalIn<T>(code: string, read: (handle: QuickJSHandle) => T): T {
  const handle = vm.unwrapResult(vm.evalCode(code));
  try {
    return read(handle);
  } finally {
    handle.dispose();
  }
}

/** A copy of an ArrayBuffer held by the VM (the library's view points into the wasm heap). */
function bytesOf(code: string): ArrayBuffer {
  return evalIn(code, (handle) => {
    const view = vm.getArrayBuffer(handle);
    try {
      return view.value.slice().buffer;
    } finally {
      view.dispose();
    }
  });
}

function setGlobal(name: string, handle: QuickJSHandle): void {
  vm.setProp(vm.global, name, handle);
  handle.dispose();
}

describe('core bundle in QuickJS', () => {
  it('builds one ES2020 file within the size budget', () => {
    expect(build.stderr).toBe('');
    expect(build.status).toBe(0);
    expect(statSync(bundlePath).size).toBeLessThanOrEqual(BUDGET_BYTES);
    console.log(build.stdout.trim());
  });

  it('sets a global in QuickJS with the same API as src/core/embedded.ts', () => {
    const names = evalIn('JSON.stringify(Object.keys(globalThis.fringetally).sort())', (handle) => vm.getString(handle));
    expect(JSON.parse(names)).toEqual(Object.keys(core).sort());
    expect(Object.keys(core)).toContain('createPipeline');
  });

  it('gives the same fit, positions, velocities, levels, flags and alarm events as Node on the demo capture', () => {
    const node = timed(NODE_RUNS, () => runInNode(core, x, y, setup));
    // Alarms must occur for the comparison to cover them: the demo's beam interruption.
    expect(JSON.parse(node.result.events)).toContainEqual([expect.any(Number), 'lowSignal', 'raised']);

    setGlobal('inputX', vm.newArrayBuffer(x.buffer));
    setGlobal('inputY', vm.newArrayBuffer(y.buffer));
    // Numbers cross as doubles, not as decimal text, so the VM sees exactly Node's options.
    const setupHandle = vm.newObject();
    for (const [key, value] of Object.entries(setup)) {
      const number = vm.newNumber(value);
      vm.setProp(setupHandle, key, number);
      number.dispose();
    }
    setGlobal('setup', setupHandle);
    const chain = `globalThis.result = (function (core, x, y, setup) {${CHAIN_BODY}})` +
      '(globalThis.fringetally, new Int16Array(inputX), new Int16Array(inputY), setup); undefined';
    const quickjs = timed(QUICKJS_RUNS, () => evalIn(chain, () => undefined));

    const fit = new Float64Array(bytesOf('result.fit.buffer'));
    const positionM = new Float64Array(bytesOf('result.positionM.buffer'));
    const velocityMS = new Float64Array(bytesOf('result.velocityMS.buffer'));
    const level = new Float32Array(bytesOf('result.level.buffer'));
    const flags = new Uint8Array(bytesOf('result.flags.buffer'));
    const eventValues = new Float64Array(bytesOf('result.eventValues.buffer'));
    const events = evalIn('result.events', (handle) => vm.getString(handle));

    const n = node.result;
    expect([
      ...differences('fit', n.fit, fit),
      ...differences('positionM', n.positionM, positionM),
      ...differences('velocityMS', n.velocityMS, velocityMS),
      ...differences('level', n.level, level),
      ...differences('flags', n.flags, flags),
      ...differences('event value', n.eventValues, eventValues),
    ]).toEqual([]);
    expect(JSON.parse(events)).toEqual(JSON.parse(n.events));

    const perSample = (ms: number) => `${((ms * 1e6) / x.length).toFixed(0)} ns/sample`;
    console.log(
      `fit + pipeline over ${x.length} samples: Node first run ${perSample(node.firstMs)}, best of ${NODE_RUNS} ` +
        `${perSample(node.bestMs)}; QuickJS first run ${perSample(quickjs.firstMs)}, best of ${QUICKJS_RUNS} ` +
        `${perSample(quickjs.bestMs)}; QuickJS/Node (best) ${(quickjs.bestMs / node.bestMs).toFixed(0)}x`,
    );
  });
});
