import { createPipeline, createQuadratureSynthesizer, fastAtan2 } from '../dist/src/core/index.js';
import { benchSignal } from '../dist/bench/cases/core.js';
const BLOCK = 4096, TOTAL = 1 << 22, blocks = TOTAL / BLOCK;
const ellipse = { offsetX: 700, offsetY: -450, amplitudeX: 12000, amplitudeY: 10800, phaseErrorRad: 0.06 };
const { x, y } = benchSignal(TOTAL);
const xs = Array.from({ length: blocks }, (_, b) => x.subarray(b * BLOCK, (b + 1) * BLOCK));
const ys = Array.from({ length: blocks }, (_, b) => y.subarray(b * BLOCK, (b + 1) * BLOCK));
const phase = new Float64Array(BLOCK);
const jsFront = {
  process(x, y, length, k, low, high, minLevel, level) {
    const c0 = k[0], c1 = k[1], c2 = k[2], c3 = k[3], c4 = k[4];
    for (let i = 0; i < length; i++) {
      const xi = x[i], yi = y[i];
      const u = c0 * xi + c1, v = c2 * xi + c3 * yi + c4;
      const lev = Math.sqrt(u * u + v * v);
      if (!(lev >= minLevel) || xi <= low || xi >= high || yi <= low || yi >= high) return null;
      level[i] = lev;
      phase[i] = fastAtan2(v, u);
    }
    return phase;
  },
};
const use = process.argv[2] === 'front';
const pipeline = createPipeline({ rateHz: 10e6, wavelengthM: 632.9908e-9, fold: 2, calibration: ellipse, adc: { kind: 'int16' }, ...(use ? { frontEnd: jsFront } : {}) });
const output = { positionM: new Float64Array(BLOCK), velocityMS: new Float64Array(BLOCK), level: new Float32Array(BLOCK), flags: new Uint8Array(BLOCK) };
const events = [];
const pass = () => { for (let b = 0; b < blocks; b++) pipeline.process(xs[b], ys[b], BLOCK, output, events); events.length = 0; };
for (let w = 0; w < 5; w++) pass();
const t = []; for (let k = 0; k < 15; k++) { const t0 = process.hrtime.bigint(); pass(); t.push(Number(process.hrtime.bigint() - t0) / TOTAL); }
t.sort((a, b) => a - b); console.log(use ? 'js-front' : 'stages', t[7].toFixed(2));
