// `npm run bench [-- --json] [-- --heap-samples N]`: runs every benchmark case and prints a table or one JSON document.
import { parseArgs } from 'node:util';
import { coreCases, heapGrowth } from './cases/core.js';
import { measure, type BenchResult } from './harness.js';

const { values } = parseArgs({
  options: {
    json: { type: 'boolean', default: false },
    'heap-samples': { type: 'string', default: String(1e8) },
  },
});

const results: BenchResult[] = [];
for (const benchCase of coreCases()) {
  results.push(measure(benchCase));
  if (!values.json) process.stderr.write(`measured ${benchCase.name}\n`);
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

if (values.json) {
  process.stdout.write(JSON.stringify({ cases: results, pipelineOverNaive: pipeline.samplesPerSecond / naive.samplesPerSecond }, null, 2) + '\n');
} else {
  for (const result of results) {
    const extra = result.extra ? '  ' + Object.entries(result.extra).map(([k, v]) => `${k}=${v}`).join(' ') : '';
    process.stdout.write(
      `${result.name.padEnd(40)} ${(result.samplesPerSecond / 1e6).toFixed(1).padStart(8)} M samples/s ${result.nsPerSample.toFixed(2).padStart(8)} ns/sample${extra}\n`,
    );
  }
  process.stdout.write(`pipeline / naive baseline: ${(pipeline.samplesPerSecond / naive.samplesPerSecond).toFixed(1)}x\n`);
}
