// `npm run bench [-- --json] [-- --reference] [-- --tools] [-- --analyses] [-- --capture] [-- --replay] [-- --stream] [-- --live] [-- --accuracy] [-- --all]`:
// measures the core stages, the whole pipeline (plain and with the WebAssembly front ends) and the decoder (always), and on request the capture readers,
// replay from files, the stream API and the WebSocket feed, live tracking through a pseudo-terminal (needs socat) and the accuracy of
// the ellipse fits; prints a table or one JSON document.
import { parseArgs } from 'node:util';
import { runAccuracyBenchmark, formatAccuracyTable } from './accuracy.js';
import { execFileSync } from 'node:child_process';
import { fileURLToPath } from 'node:url';
import { ACCEL_CASE_NAMES, accelCases } from './cases/accel.js';
import { analysesCases } from './cases/analyses.js';
import { captureCases } from './cases/capture.js';
import { coreCases, heapGrowth } from './cases/core.js';
import { decoderCases, type DecoderBenchCase } from './cases/decoder.js';
import { feedBenchmarks } from './cases/feed.js';
import { liveBenchmarks } from './cases/live.js';
import { compileReference, JS_MINIMAL_CASE, jsMinimalCase, machine } from './cases/reference.js';
import { replayCases } from './cases/replay.js';
import { toolCases } from './cases/tools.js';
import { listenCases, listenMemoryCases } from './cases/listen.js';
import { streamCase, streamCaseNames } from './cases/stream.js';
import { measure, median, type BenchResult } from './harness.js';

const { values } = parseArgs({
  options: {
    json: { type: 'boolean', default: false },
    capture: { type: 'boolean', default: false },
    replay: { type: 'boolean', default: false },
    accuracy: { type: 'boolean', default: false },
    live: { type: 'boolean', default: false },
    stream: { type: 'boolean', default: false },
    reference: { type: 'boolean', default: false },
    tools: { type: 'boolean', default: false },
    analyses: { type: 'boolean', default: false },
    'tools-samples': { type: 'string', default: String(3e7) },
    'tools-memory-samples': { type: 'string', default: `${1e7},${1e8}` },
    'listen-memory-samples': { type: 'string', default: `${1e7},${1e8}` },
    all: { type: 'boolean', default: false },
    'heap-samples': { type: 'string', default: String(1e8) },
    case: { type: 'string' },
    'replay-memory-samples': { type: 'string', default: String(8e6) },
  },
});
const log = (line: string) => {
  if (!values.json) process.stderr.write(line + '\n');
};

function measureDecoder(benchCase: DecoderBenchCase): BenchResult {
  const result = measure(benchCase);
  const megabytesPerSecond = (benchCase.bytesPerPass * result.samplesPerSecond) / benchCase.samplesPerPass / 1e6;
  return { ...result, extra: { megabytesPerSecond } };
}

// Every core, accelerated, decoder and stream case runs in a process of its own: in one process, a case leaves
// V8 type feedback from its own call sites in the code the next case shares with it, and slows that case.
if (values.case !== undefined) {
  const name = values.case;
  const core = coreCases().filter((benchCase) => benchCase.name === name).map((benchCase) => measure(benchCase));
  const decoder = core.length > 0 ? [] : decoderCases().filter((benchCase) => benchCase.name === name).map(measureDecoder);
  const stream = core.length + decoder.length > 0 ? null : streamCase(name);
  const reference = name === JS_MINIMAL_CASE ? [jsMinimalCase()] : [];
  const found = [...core, ...decoder, ...(stream === null ? [] : [stream]), ...reference];
  process.stdout.write(JSON.stringify(found.length > 0 ? found : accelCases(name)) + '\n');
  process.exit(0);
}
const script = fileURLToPath(import.meta.url);
function isolated(name: string): BenchResult[] {
  const output = execFileSync(process.execPath, ['--expose-gc', script, '--case', name], { encoding: 'utf8', maxBuffer: 1 << 24 });
  return JSON.parse(output) as BenchResult[];
}

const results: BenchResult[] = [];
for (const name of coreCases().map((benchCase) => benchCase.name)) {
  results.push(...isolated(name));
  log(`measured ${name}`);
}
const pipeline = results.find((result) => result.name === 'pipeline/int16/block4096')!;
const naive = results.find((result) => result.name.startsWith('baseline/naive'))!;
const heap = heapGrowth(Number(values['heap-samples']));
results.push({
  name: 'pipeline/int16/block4096/heap',
  samplesPerSecond: heap.samples / heap.seconds,
  nsPerSample: (heap.seconds * 1e9) / heap.samples,
  passes: 1,
  extra: { samples: heap.samples, heapGrowthBytes: heap.heapGrowthBytes },
});
log('measured heap growth');
for (const name of ACCEL_CASE_NAMES) {
  results.push(...isolated(name));
  log(`measured ${name}`);
}
// The decoder cases too, each alone: one frame layout's type feedback slowed the next layout's case.
for (const name of decoderCases().map((benchCase) => benchCase.name)) {
  results.push(...isolated(name));
  log(`measured ${name}`);
}
// Ratios to C and to a minimal JavaScript loop, all in process CPU time and in this run (figures from
// different runs move by 10–30 % on this kind of machine; ratios within one run move much less).
let reference: Record<string, number> | null = null;
/** Rounds of the default pipeline and the plain C case measured one right after the other (see --reference). */
const PAIRED_ROUNDS = 5;
if (values.reference || values.all) {
  results.push(...isolated(JS_MINIMAL_CASE));
  const compiled = await compileReference();
  // The plain C case moves by up to 2x from one run to the next, and a run measures it a minute after the
  // pipeline: PAIRED_ROUNDS rounds then measure the default pipeline and the plain C case right after each other,
  // and their median ratio is the figure least moved by when each ran.
  const pairedRatios: number[] = [];
  try {
    for (const name of compiled.names) results.push(compiled.run(name));
    log('measured the reference implementations');
    for (let round = 0; round < PAIRED_ROUNDS; round++) {
      const ours = isolated('pipeline/int16/block4096/default')[0]!;
      const plain = compiled.run('reference/c-plain-libm');
      pairedRatios.push(ours.samplesPerSecond / plain.samplesPerSecond);
      results.push({ ...ours, name: `reference/paired-${round + 1}/default` }, { ...plain, name: `reference/paired-${round + 1}/c-plain-libm` });
    }
    log(`measured ${PAIRED_ROUNDS} paired rounds`);
  } finally {
    await compiled.dispose();
  }
  const rate = (name: string) => results.find((result) => result.name === name)?.samplesPerSecond ?? Number.NaN;
  const best = Math.max(...results.filter((result) => result.name.startsWith('pipeline/int16/block4096/')).map((result) => result.samplesPerSecond));
  const fastest = results.find((result) => result.samplesPerSecond === best)!.name;
  reference = {
    defaultOverPlainC: rate('pipeline/int16/block4096/default') / rate('reference/c-plain-libm'),
    pairedDefaultOverPlainC: median(pairedRatios),
    defaultOverPlainCNative: rate('pipeline/int16/block4096/default') / rate('reference/c-plain-libm-native'),
    defaultOverMinimalJs: rate('pipeline/int16/block4096/default') / rate(JS_MINIMAL_CASE),
    defaultOverVectorisedC: rate('pipeline/int16/block4096/default') / rate('reference/c-vectorised-poly'),
    bestOverVectorisedC: best / rate('reference/c-vectorised-poly'),
  };
  log(`fastest pipeline variant: ${fastest}`);
}
if (values.analyses || values.all) {
  results.push(...analysesCases());
  log('measured the capture analyses, core and accelerated');
}
if (values.capture || values.all) {
  results.push(...(await captureCases()));
  log('measured capture readers');
}
if (values.replay || values.all) {
  results.push(...(await replayCases({ memorySamples: Number(values['replay-memory-samples']) })));
  log('measured replay');
}
let tools: Record<string, number> | null = null;
if (values.tools || values.all) {
  const [short, long] = values['tools-memory-samples'].split(',').map(Number) as [number, number];
  const listenLengths = values['listen-memory-samples'].split(',').map(Number) as [number, number];
  const measured = [
    ...(await toolCases({ samples: Number(values['tools-samples']), memorySamples: [short, long] })),
    ...(await listenCases()),
    ...(await listenMemoryCases(listenLengths)),
  ];
  results.push(...measured);
  log('measured calibrate and replay end to end');
  // Each case against the bare default pipeline measured right beside it in this process, the median of the pairs'
  // ratios (overBarePipeline: calibrate and replay in wall clock with their start-up, listen in CPU time, the bare
  // pipeline in CPU time); the run's core case, minutes away, moved by up to 1.6x from it.
  tools = Object.fromEntries(measured.filter((result) => result.extra?.overBarePipeline !== undefined).map((result) => [result.name, result.extra!.overBarePipeline!]));
}
if (values.stream || values.all) {
  // Each alone, as above: the direct pipeline case left type feedback that slowed the axis builder's cases.
  for (const name of streamCaseNames) results.push(...isolated(name));
  results.push(...(await feedBenchmarks()));
  log('measured the stream API and the WebSocket feed');
}
if (values.live || values.all) {
  results.push(...(await liveBenchmarks()));
  log('measured live tracking through a pseudo-terminal');
}
const accuracy = values.accuracy || values.all ? runAccuracyBenchmark() : null;

if (values.json) {
  const document = {
    machine: machine(),
    cases: results,
    pipelineOverNaive: pipeline.samplesPerSecond / naive.samplesPerSecond,
    ...(reference === null ? {} : { reference }),
    ...(tools === null ? {} : { toolsOverBarePipeline: tools }),
    ...(accuracy === null ? {} : { accuracy }),
  };
  process.stdout.write(JSON.stringify(document, null, 2) + '\n');
} else {
  for (const result of results) {
    const extra = result.extra ? '  ' + Object.entries(result.extra).map(([k, v]) => `${k}=${Number.isInteger(v) ? v : v.toPrecision(4)}`).join(' ') : '';
    process.stdout.write(
      `${result.name.padEnd(44)} ${(result.samplesPerSecond / 1e6).toFixed(1).padStart(8)} M samples/s ${result.nsPerSample.toFixed(2).padStart(8)} ns/sample${extra}\n`,
    );
  }
  process.stdout.write(`pipeline / naive baseline: ${(pipeline.samplesPerSecond / naive.samplesPerSecond).toFixed(1)}x\n`);
  if (tools !== null) {
    for (const [name, ratio] of Object.entries(tools)) process.stdout.write(`${name} / bare pipeline: ${ratio.toFixed(2)}x\n`);
    const startUp = results.find((result) => result.name === 'replay/start-up')?.extra?.wallSeconds;
    const samples = Number(values['tools-samples']);
    // The bare pipeline as paired with replay's runs.
    const bare = results.find((result) => result.name === `replay/wav/int16/${samples}/every10000/end-to-end`)!.extra!.barePipelineSamplesPerSecond!;
    if (startUp !== undefined) {
      // A run can be no faster than its start-up plus the bare pipeline over its samples.
      const ceiling = samples / bare / (samples / bare + startUp);
      process.stdout.write(`start-up of a tool ${startUp.toFixed(3)} s: with it a run of ${samples} samples reaches at most ${ceiling.toFixed(2)}x the bare pipeline\n`);
      // And the reading too, when it runs on the pipeline's thread as in calibrate and replay.
      const read = results.find((result) => result.name === `capture/wav/int16/${samples}/read-alone`)?.extra?.wallSeconds;
      if (read !== undefined) {
        const withReading = samples / bare / (samples / bare + startUp + read);
        process.stdout.write(`reading the capture alone ${read.toFixed(3)} s: start-up, reading and the bare pipeline one after the other reach at most ${withReading.toFixed(2)}x\n`);
      }
    }
  }
  if (reference !== null) {
    for (const [key, ratio] of Object.entries(reference)) process.stdout.write(`${key}: ${ratio.toFixed(2)}x\n`);
    const { cpuModel, cpuFlags } = machine();
    process.stdout.write(`CPU: ${cpuModel}, ${cpuFlags.filter((flag) => /^(avx|sse4|fma|neon|asimd)/.test(flag)).join(' ')}\n`);
  }
  if (accuracy !== null) process.stdout.write('\n' + formatAccuracyTable(accuracy) + '\n');
}
