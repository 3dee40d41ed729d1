// Timing harness: warm up, then the median of repeated passes; samples/s and ns/sample per case.

/** One measured case; `name` carries its parameters, e.g. `pipeline/int16/block4096`. */
export interface BenchCase {
  readonly name: string;
  /** Samples one call of `pass` processes. */
  readonly samplesPerPass: number;
  /** Prepares buffers once, before warm-up; optional. */
  setup?(): void;
  pass(): void;
  /** Releases what `setup` started (subscriptions, timers) once measured; optional. */
  teardown?(): void;
}

export interface BenchResult {
  name: string;
  samplesPerSecond: number;
  nsPerSample: number;
  passes: number;
  /** Extra figures of a case (MB/s, heap growth, latency percentiles...). */
  extra?: Record<string, number>;
}

export interface MeasureOptions {
  warmupPasses: number;
  passes: number;
}

export const defaultMeasureOptions: MeasureOptions = { warmupPasses: 5, passes: 15 };

export function median(values: readonly number[]): number {
  const sorted = [...values].sort((a, b) => a - b);
  const middle = sorted.length >> 1;
  return sorted.length % 2 === 1 ? sorted[middle]! : (sorted[middle - 1]! + sorted[middle]!) / 2;
}

export function measure(benchCase: BenchCase, options: MeasureOptions = defaultMeasureOptions): BenchResult {
  benchCase.setup?.();
  for (let i = 0; i < options.warmupPasses; i++) benchCase.pass();
  const seconds: number[] = [];
  for (let i = 0; i < options.passes; i++) {
    const start = process.hrtime.bigint();
    benchCase.pass();
    seconds.push(Number(process.hrtime.bigint() - start) / 1e9);
  }
  benchCase.teardown?.();
  const perPass = median(seconds);
  return {
    name: benchCase.name,
    samplesPerSecond: benchCase.samplesPerPass / perPass,
    nsPerSample: (perPass * 1e9) / benchCase.samplesPerPass,
    passes: options.passes,
  };
}

/** The positive integer after `name` in a case file's own command line (run directly), else undefined. */
export function positiveIntegerFlag(argv: readonly string[], name: string): number | undefined {
  const index = argv.indexOf(name);
  if (index === -1) return undefined;
  const value = Number(argv[index + 1]);
  if (!Number.isSafeInteger(value) || value < 1) throw new RangeError(`${name} must be a positive integer (got ${argv[index + 1]})`);
  return value;
}
