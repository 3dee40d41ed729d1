// `fringetally simulate`: synthetic captures of invented scenarios, with a truth file of the position per sample.
import { extname } from 'node:path';
import { createMotionProfile, createQuadratureSynthesizer } from '../../src/core/index.js';
import { createCaptureWriter } from '../../src/io/capture/index.js';
import { checkFiles, formatNumber, LASER_CAUTION, numberOption, parseCommandLine, say, UsageError, type Command } from '../cli-kit.js';
import { ellipseOf, motionOf, noiseOf, scenarioOptionSpecs } from '../scenario-options.js';

const help = `Usage: fringetally simulate --out cap.csv|cap.wav [options]

Writes a synthetic quadrature capture of an invented scenario and, beside it, a truth file with the position
of every sample (CSV: t, position_m, phase_rad). Positive displacement advances the phase atan2(y, x).

Output:
  --out FILE               capture to write; .csv (integer text) or .wav (int16 PCM, 2 channels)
  --truth FILE             truth file (default: FILE with .truth.csv in place of its extension)
  --rate-hz R              sample rate, Hz (default 1000000)
  --duration-s S           length of the capture, s (default 0.05)
  --seed N                 noise seed, integer (default 1)

Optics:
  --wavelength-nm L        vacuum wavelength, nm (default 632.9908)
  --fold N                 optical fold (default 2)
  --refractive-index n     refractive index of air (default 1)

Motion (--motion constant|trapezoid|vibration, default trapezoid):
  --velocity-m-s V         constant: velocity, m/s (default 0.01); trapezoid: peak speed, m/s (default 0.02)
  --distance-m D           trapezoid: move length, m (default 20e-6); moves forth and back (reversals)
  --acceleration-m-s2 A    trapezoid: acceleration, m/s² (default 20)
  --dwell-s S              trapezoid: pause at each end, s (default 0.002)
  --amplitude-m A          vibration: amplitude, m (default 2e-6)
  --frequency-hz F         vibration: frequency, Hz (default 200)
  --drift-m-s V            vibration: drift velocity, m/s (default 0)
  --overspeed START:DUR:V  add V m/s for DUR s from START s (repeatable), e.g. 0.01:0.001:0.2

Detectors and ADC (ellipse in ADC counts, x = aX·cos φ + oX, y = aY·sin(φ + e) + oY):
  --offset-x C, --offset-y C          offsets, counts (default 800, -500)
  --amplitude-x C, --amplitude-y C    amplitudes, counts (default 12000, 10800)
  --phase-error-rad E                 quadrature error e, rad (default 0.06)
  --noise C                           Gaussian noise per channel, counts RMS (default 20)
  --adc int16|none                    int16: rounded and clipped to the 16-bit range (default);
                                      none: unquantised values (CSV decimal text, WAV float32)
  --interrupt START:DUR               beam interrupted (signal at 2 %) for DUR s from START s (repeatable)

${LASER_CAUTION}`;

/** Parses `a:b[:c]` windows such as --interrupt 0.01:0.002. */
function windows(flag: string, texts: readonly string[], parts: number): number[][] {
  return texts.map((text) => {
    const values = text.split(':').map(Number);
    if (values.length !== parts || values.some((value) => !Number.isFinite(value))) {
      throw new UsageError(`--${flag} expects ${parts} numbers separated by ":" (got "${text}")`);
    }
    if (values[1]! <= 0) throw new UsageError(`--${flag}: the duration must be positive (got "${text}")`);
    return values;
  });
}

const BLOCK = 4096;

async function run(argv: readonly string[]): Promise<number> {
  const { values } = parseCommandLine(
    argv,
    {
      out: { type: 'string' },
      truth: { type: 'string' },
      'rate-hz': { type: 'string' },
      'duration-s': { type: 'string' },
      seed: { type: 'string' },
      'wavelength-nm': { type: 'string' },
      fold: { type: 'string' },
      'refractive-index': { type: 'string' },
      overspeed: { type: 'string', multiple: true },
      adc: { type: 'string' },
      interrupt: { type: 'string', multiple: true },
      quiet: { type: 'boolean' },
      ...scenarioOptionSpecs,
    },
    false,
  );
  const out = values.out;
  if (out === undefined) throw new UsageError('--out is required');
  const extension = extname(out).toLowerCase();
  if (extension !== '.csv' && extension !== '.wav') throw new UsageError(`--out must end in .csv or .wav (got "${out}")`);
  const format = extension === '.wav' ? 'wav' : 'csv';
  const truthPath = values.truth ?? out.slice(0, out.length - extension.length) + '.truth.csv';
  const num = (name: string, fallback: number) => numberOption(name, values[name as keyof typeof values] as string | undefined) ?? fallback;
  const rateHz = num('rate-hz', 1e6);
  const durationS = num('duration-s', 0.05);
  const seed = num('seed', 1);
  const wavelengthNm = num('wavelength-nm', 632.9908);
  const wavelengthM = wavelengthNm * 1e-9;
  const fold = num('fold', 2);
  const refractiveIndex = num('refractive-index', 1);
  const adcText = values.adc ?? 'int16';
  if (adcText !== 'int16' && adcText !== 'none') throw new UsageError(`--adc must be int16 or none (got "${adcText}")`);
  const quantised = adcText === 'int16';

  const spec = motionOf(values, 'trapezoid', { constant: 0.01, trapezoid: 0.02 });
  const motionKind = spec.kind;
  const overspeed = windows('overspeed', values.overspeed ?? [], 3);
  const interrupts = windows('interrupt', values.interrupt ?? [], 2);

  const ellipse = ellipseOf(values);
  const profile = createMotionProfile(spec, rateHz);
  const synthesizer = createQuadratureSynthesizer({ ellipse, noiseRms: noiseOf(values), adc: quantised ? { kind: 'int16' } : null, seed });
  const radPerMetre = (2 * Math.PI * fold * refractiveIndex) / wavelengthM;
  const total = Math.round(durationS * rateHz);
  const metadata = {
    scenario: `invented test scenario: ${motionKind} motion`,
    // WAV headers state the sample format themselves; CSV says it here so saturation can be detected.
    ...(format === 'csv' ? { adc: quantised ? 'int16' : 'float' } : {}),
    ...(format === 'csv' && !quantised ? { adc_full_scale: String(2 ** 31) } : {}),
    // The numbers as given: a product such as 632.9908e-9 * 1e9 would read 632.9908000000001.
    wavelength_nm: String(wavelengthNm),
    fold: String(fold),
    refractive_index: String(refractiveIndex),
  };
  await checkFiles([], [{ option: '--out', path: out }, { option: '--truth', path: truthPath }]);
  const capture = await createCaptureWriter(out, {
    format,
    rateHz,
    encoding: format === 'wav' ? (quantised ? 'int16' : 'float32') : quantised ? 'integer-text' : 'decimal-text',
    metadata,
  });
  const truth = await createCaptureWriter(truthPath, {
    format: 'csv',
    rateHz,
    channelNames: ['position_m', 'phase_rad'],
    timeColumn: true,
    metadata: { scenario: metadata.scenario, truth_of: out },
  });
  const position = new Float64Array(BLOCK);
  const phase = new Float64Array(BLOCK);
  const gain = new Float64Array(BLOCK);
  const x = new Float64Array(BLOCK);
  const y = new Float64Array(BLOCK);
  // The largest step between samples, as the receiver sees it (profile and overspeed windows together).
  let largestStepM = 0;
  let lastPositionM = Number.NaN;
  try {
    for (let first = 0; first < total; first += BLOCK) {
      const n = Math.min(BLOCK, total - first);
      profile.process(first, position, n);
      for (let i = 0; i < n; i++) {
        const t = (first + i) / rateHz;
        let extra = 0;
        for (const [start, duration, velocity] of overspeed) extra += velocity! * Math.min(Math.max(t - start!, 0), duration!);
        position[i] = position[i]! + extra;
        const step = Math.abs(position[i]! - lastPositionM);
        if (step > largestStepM) largestStepM = step;
        lastPositionM = position[i]!;
        phase[i] = position[i]! * radPerMetre;
        let g = 1;
        for (const [start, duration] of interrupts) if (t >= start! && t < start! + duration!) g = 0.02;
        gain[i] = g;
      }
      synthesizer.process(phase, x, y, n, gain);
      await capture.write(x, y, n);
      await truth.write(position, phase, n);
    }
    await capture.close();
    await truth.close();
  } catch (error) {
    await capture.abort();
    await truth.abort();
    throw error;
  }
  if (values.quiet !== true) {
    const unambiguousMS = (wavelengthM * rateHz) / (2 * fold * refractiveIndex);
    // Sampled motion: a single sample's step divided by the sample time, profile and overspeed windows together;
    // before the first sample pair, the profile's own peak.
    const peakSpeedMS = total > 1 ? largestStepM * rateHz : profile.peakSpeedMS;
    const lines = [
      `wrote ${out} (${total} samples at ${formatNumber(rateHz)} Hz, ${format}) and truth ${truthPath}`,
      `scenario: invented, ${motionKind} motion${overspeed.length > 0 ? ` with ${overspeed.length} overspeed window(s)` : ''}, peak speed ${peakSpeedMS.toPrecision(4)} m/s ` +
        `(unambiguous limit ${unambiguousMS.toPrecision(4)} m/s)`,
    ];
    // The same rule as emulate: beyond a quarter fringe per sample the receiver raises overspeed.
    if (peakSpeedMS > unambiguousMS / 2) {
      lines.push(
        `note: peak speed ${peakSpeedMS.toPrecision(4)} m/s is above a quarter fringe per sample (${(unambiguousMS / 2).toPrecision(4)} m/s): ` +
          `a replay will raise overspeed${peakSpeedMS >= unambiguousMS ? ' and lose count' : ''}`,
      );
    }
    say(lines);
  }
  return 0;
}

export const simulate: Command = { name: 'simulate', summary: 'write a synthetic capture of an invented scenario and its truth file', help, run };
