// Small static SVG line charts for the analysis reports (spectrum, positioning): linear or logarithmic axes with
// round ticks (1-2-5 steps, or decades), several series, vertical markers and bands. No scripts, nothing fetched.

export const escapeHtml = (text: string) => text.replace(/&/g, '&amp;').replace(/</g, '&lt;').replace(/>/g, '&gt;').replace(/"/g, '&quot;');

export interface ChartSeries {
  readonly x: ArrayLike<number>;
  readonly y: ArrayLike<number>;
  /** CSS class of the path: `line` (default), `line-2`, `line-3`, `dots`, `band` (closed area, x forth then back). */
  readonly kind?: 'line' | 'line-2' | 'line-3' | 'dots' | 'band';
  readonly label?: string;
}

export interface ChartMarker {
  readonly x: number;
  readonly label: string;
}

export interface ChartOptions {
  readonly title: string;
  readonly xLabel: string;
  readonly yLabel: string;
  readonly xLog?: boolean;
  readonly yLog?: boolean;
  readonly width?: number;
  readonly height?: number;
  readonly markers?: readonly ChartMarker[];
}

const LEFT = 72;
const BOTTOM = 38;
const TOP = 12;
const RIGHT = 14;

/** Round ticks covering [low, high]: decades on a log axis, 1-2-5 steps on a linear one. */
export function roundTicks(low: number, high: number, log: boolean): number[] {
  if (log) {
    const ticks: number[] = [];
    for (let e = Math.floor(Math.log10(low)); e <= Math.ceil(Math.log10(high)); e++) ticks.push(10 ** e);
    return ticks;
  }
  const raw = (high - low) / 5;
  const power = 10 ** Math.floor(Math.log10(raw));
  const step = [1, 2, 5, 10].map((m) => m * power).find((s) => s >= raw) ?? 10 * power;
  const ticks: number[] = [];
  // From the last round value at or below low to the first at or above high, so the axis ends on ticks.
  const first = Math.floor(low / step + 1e-9);
  const last = Math.ceil(high / step - 1e-9);
  for (let k = first; k <= last; k++) ticks.push(Number((k * step).toPrecision(12)));
  return ticks;
}

function extent(values: number[], log: boolean): [number, number] {
  const usable = values.filter((v) => Number.isFinite(v) && (!log || v > 0));
  if (usable.length === 0) return log ? [1, 10] : [0, 1];
  let low = Math.min(...usable);
  let high = Math.max(...usable);
  if (log) return [10 ** Math.floor(Math.log10(low)), 10 ** Math.ceil(Math.log10(high))];
  if (low === high) {
    low -= 1;
    high += 1;
  }
  const ticks = roundTicks(low, high, false);
  return [Math.min(low, ticks[0]!), Math.max(high, ticks[ticks.length - 1]!)];
}

const tickText = (v: number) => (v === 0 ? '0' : Math.abs(v) >= 1e4 || Math.abs(v) < 1e-3 ? v.toExponential(0) : String(Number(v.toPrecision(6))));

/** One chart as an inline SVG element of class `plot`. */
export function lineChart(series: readonly ChartSeries[], options: ChartOptions): string {
  const width = options.width ?? 760;
  const height = options.height ?? 300;
  const xLog = options.xLog === true;
  const yLog = options.yLog === true;
  const xs: number[] = [];
  const ys: number[] = [];
  for (const s of series) {
    for (let i = 0; i < s.x.length; i++) {
      if (Number.isFinite(s.y[i]!) && (!yLog || s.y[i]! > 0)) {
        xs.push(s.x[i]!);
        ys.push(s.y[i]!);
      }
    }
  }
  const [x0, x1] = extent(xs, xLog);
  const [y0, y1] = extent(ys, yLog);
  const fx = (v: number) => (xLog ? (Math.log10(v) - Math.log10(x0)) / (Math.log10(x1) - Math.log10(x0)) : (v - x0) / (x1 - x0));
  const fy = (v: number) => (yLog ? (Math.log10(v) - Math.log10(y0)) / (Math.log10(y1) - Math.log10(y0)) : (v - y0) / (y1 - y0));
  const px = (v: number) => LEFT + fx(v) * (width - LEFT - RIGHT);
  const py = (v: number) => height - BOTTOM - fy(v) * (height - BOTTOM - TOP);
  const drawable = (x: number, y: number) => Number.isFinite(x) && Number.isFinite(y) && (!xLog || x > 0) && (!yLog || y > 0);
  const paths = series
    .map((s) => {
      const kind = s.kind ?? 'line';
      let d = '';
      let pen = false;
      for (let i = 0; i < s.x.length; i++) {
        const x = s.x[i]!;
        const y = s.y[i]!;
        if (!drawable(x, y)) {
          pen = false;
          continue;
        }
        const point = `${px(x).toFixed(1)} ${py(y).toFixed(1)}`;
        d += kind === 'dots' ? `M${point}h0.1` : `${pen ? 'L' : 'M'}${point}`;
        pen = true;
      }
      if (kind === 'band' && d !== '') d += 'Z';
      return `<path class="${kind}" d="${d}">${s.label === undefined ? '' : `<title>${escapeHtml(s.label)}</title>`}</path>`;
    })
    .join('');
  const xTicks = roundTicks(x0, x1, xLog).filter((v) => v >= x0 * (1 - 1e-9) && v <= x1 * (1 + 1e-9));
  const yTicks = roundTicks(y0, y1, yLog).filter((v) => v >= y0 - Math.abs(y0) * 1e-9 && v <= y1 + Math.abs(y1) * 1e-9);
  const grid =
    xTicks.map((v) => `<line class="grid" x1="${px(v).toFixed(1)}" x2="${px(v).toFixed(1)}" y1="${TOP}" y2="${height - BOTTOM}"/><text x="${px(v).toFixed(1)}" y="${height - BOTTOM + 14}" text-anchor="middle">${tickText(v)}</text>`).join('') +
    yTicks.map((v) => `<line class="grid" x1="${LEFT}" x2="${width - RIGHT}" y1="${py(v).toFixed(1)}" y2="${py(v).toFixed(1)}"/><text x="${LEFT - 4}" y="${(py(v) + 4).toFixed(1)}" text-anchor="end">${tickText(v)}</text>`).join('');
  const markers = (options.markers ?? [])
    .filter((m) => m.x >= x0 && m.x <= x1)
    .map((m) => `<line class="marker" x1="${px(m.x).toFixed(1)}" x2="${px(m.x).toFixed(1)}" y1="${TOP}" y2="${height - BOTTOM}"/><text class="marker-label" x="${(px(m.x) + 3).toFixed(1)}" y="${TOP + 12}">${escapeHtml(m.label)}</text>`)
    .join('');
  const midY = (height - BOTTOM + TOP) / 2;
  return (
    `<svg class="plot" role="img" aria-label="${escapeHtml(options.title)}" viewBox="0 0 ${width} ${height}" width="${width}" height="${height}">` +
    `<rect class="plot-area" x="${LEFT}" y="${TOP}" width="${width - LEFT - RIGHT}" height="${height - BOTTOM - TOP}"/>` +
    grid +
    paths +
    markers +
    `<text x="${(LEFT + width) / 2}" y="${height - 6}" text-anchor="middle">${escapeHtml(options.xLabel)}</text>` +
    `<text x="12" y="${midY}" transform="rotate(-90 12 ${midY})" text-anchor="middle">${escapeHtml(options.yLabel)}</text></svg>`
  );
}

export const CHART_CSS = `body { font: 14px/1.4 system-ui, sans-serif; margin: 24px; color: #1c1c1c; background: #fafafa; }
h1 { font-size: 20px; } h2 { font-size: 16px; margin-top: 28px; }
table { border-collapse: collapse; } th, td { text-align: left; padding: 3px 12px 3px 0; vertical-align: top; } th { font-weight: 600; }
table.grid td, table.grid th { border-bottom: 1px solid #ddd; text-align: right; } table.grid th:first-child, table.grid td:first-child { text-align: left; }
.plot { background: #fff; margin: 6px 12px 6px 0; } .plot text { font-size: 11px; fill: #333; }
.plot-area { fill: none; stroke: #999; } .grid { stroke: #e6e6e6; }
.line { fill: none; stroke: #2b6cb0; stroke-width: 1.5; } .line-2 { fill: none; stroke: #c05621; stroke-width: 1.5; }
.line-3 { fill: none; stroke: #2f855a; stroke-width: 1.5; } .dots { stroke: #1c1c1c; stroke-width: 4; stroke-linecap: round; }
.band { fill: #2b6cb022; stroke: none; } .marker { stroke: #c53030; stroke-dasharray: 4 3; } .marker-label { fill: #c53030 !important; }
.key-1 { color: #2b6cb0; } .key-2 { color: #c05621; } .key-3 { color: #2f855a; }
.caution { border-left: 4px solid #c05621; padding: 6px 12px; background: #fff; max-width: 760px; }`;

/** A whole self-contained page. */
export function page(title: string, body: string): string {
  return `<!doctype html>
<html lang="en"><head><meta charset="utf-8"><title>${escapeHtml(title)}</title>
<style>
${CHART_CSS}
</style></head><body>
<h1>${escapeHtml(title)}</h1>
${body}
</body></html>
`;
}

/** A two-column table of label and value. */
export function factTable(rows: ReadonlyArray<readonly [string, string]>): string {
  return `<table>${rows.map(([k, v]) => `<tr><th>${escapeHtml(k)}</th><td>${escapeHtml(v)}</td></tr>`).join('')}</table>`;
}

/**
 * At most about `maxPoints` points of a curve drawn on a log-x axis: points are grouped in buckets of equal width in
 * log x and each bucket keeps its largest y, so narrow lines survive. Points at x ≤ 0 are dropped.
 */
export function logDecimate(x: ArrayLike<number>, y: ArrayLike<number>, maxPoints: number): { x: Float64Array; y: Float64Array } {
  let low = Infinity;
  let high = -Infinity;
  for (let i = 0; i < x.length; i++) {
    if (x[i]! > 0) {
      low = Math.min(low, x[i]!);
      high = Math.max(high, x[i]!);
    }
  }
  if (!(high > low) || x.length <= maxPoints) return { x: Float64Array.from(x), y: Float64Array.from(y) };
  const perBucket = (Math.log(high) - Math.log(low)) / maxPoints;
  const outX: number[] = [];
  const outY: number[] = [];
  let bucket = -1;
  for (let i = 0; i < x.length; i++) {
    if (!(x[i]! > 0)) continue;
    const b = Math.floor((Math.log(x[i]!) - Math.log(low)) / perBucket);
    if (b !== bucket) {
      outX.push(x[i]!);
      outY.push(y[i]!);
      bucket = b;
    } else if (y[i]! > outY[outY.length - 1]!) {
      outX[outX.length - 1] = x[i]!;
      outY[outY.length - 1] = y[i]!;
    }
  }
  return { x: Float64Array.from(outX), y: Float64Array.from(outY) };
}
