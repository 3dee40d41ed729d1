// Static SVG charts for every HTML report (calibrate and replay, spectrum, positioning): inline SVG drawn when the
// report is written, no scripts, nothing fetched.
//
// Axes use d3-scale (scaleLinear/scaleLog with nice domains and ticks): its tick rule (steps of 1, 2 or 5 × 10^k,
// labels at the precision of the step) is the one readers of scientific plots expect, it needs no DOM and it is
// small; a whole chart grammar rendered to SVG would bring far more than the few plot kinds drawn here. `chart` takes
// a body drawn on the scales; `lineChart` draws series of points with it.
import { scaleLinear, scaleLog } from 'd3-scale';

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
  /** Full width and height in CSS pixels; default 760 × 300. */
  readonly width?: number;
  readonly height?: number;
  readonly markers?: readonly ChartMarker[];
}

/** Finite extremes of some arrays, widened when empty or flat so a scale can be built. */
export function extent(...arrays: ArrayLike<number>[]): [number, number] {
  let low = Infinity;
  let high = -Infinity;
  for (const values of arrays) {
    for (let i = 0; i < values.length; i++) {
      const value = values[i]!;
      if (!Number.isFinite(value)) continue;
      if (value < low) low = value;
      if (value > high) high = value;
    }
  }
  if (!Number.isFinite(low)) return [0, 1];
  if (low === high) return low === 0 ? [-1, 1] : [low - Math.abs(low) * 0.01, high + Math.abs(high) * 0.01];
  return [low, high];
}

/** Characters × this ≈ the width of an 12 px label in the report's sans-serif font. */
const CHAR_PX = 7;
export const FONT_PX = 12;

export interface AxisSpec {
  readonly label: string;
  readonly domain: [number, number];
  readonly log?: boolean;
  /** Round the domain out to ticks (default true for linear axes). */
  readonly nice?: boolean;
  readonly ticks?: number;
  /** Fixed tick values instead of the scale's own. */
  readonly values?: readonly number[];
}

export interface Scale {
  (value: number): number;
  ticks(count?: number): number[];
  tickFormat(count?: number, specifier?: string): (value: number) => string;
  domain(): number[];
}

function makeScale(axis: AxisSpec, range: [number, number]): Scale {
  if (axis.log === true) return scaleLog().domain(axis.domain).range(range).clamp(true) as unknown as Scale;
  const scale = scaleLinear().domain(axis.domain).range(range);
  if (axis.nice !== false) scale.nice(axis.ticks ?? 6);
  return scale as unknown as Scale;
}

function tickLabels(axis: AxisSpec, scale: Scale): Array<{ value: number; text: string }> {
  const count = axis.ticks ?? 6;
  const values = axis.values ?? scale.ticks(count);
  const format = axis.log === true ? scale.tickFormat(count, '~g') : scale.tickFormat(count);
  return values.map((value) => ({ value, text: format(value) }));
}

export interface ChartSpec {
  readonly className?: string;
  readonly label: string;
  /** Width in CSS pixels at full size; the SVG shrinks with the page (viewBox), never overflows it. */
  readonly width: number;
  /** Height of the plot area itself. */
  readonly plotHeight: number;
  readonly x: AxisSpec;
  readonly y: AxisSpec;
  /** Same scale on both axes (a circle looks like one): the plot area is made square. */
  readonly square?: boolean;
  readonly body: (sx: Scale, sy: Scale, plot: { left: number; top: number; width: number; height: number }) => string;
  /** Labels drawn left of the plot below the axis (alarm lanes), which the left margin must hold too. */
  readonly marginLabels?: readonly string[];
  /** Extra height below the x axis label, drawn by `below`. */
  readonly belowHeight?: number;
  readonly below?: (sx: Scale, plot: { left: number; top: number; width: number; height: number }, y: number) => string;
}

/** One chart: margins sized from its own tick labels, so nothing is clipped at any page width. */
export function chart(spec: ChartSpec): string {
  const top = 10;
  // The y labels decide the left margin; the last x label (centred on its tick) decides the right one.
  const provisionalY = makeScale(spec.y, [spec.plotHeight, 0]);
  const yLabels = tickLabels(spec.y, provisionalY);
  const left = Math.max(
    24 + Math.max(...yLabels.map((label) => label.text.length), 1) * CHAR_PX + 8,
    12 + Math.max(0, ...(spec.marginLabels ?? []).map((label) => label.length)) * CHAR_PX,
  );
  const provisionalX = makeScale(spec.x, [0, 1]);
  const xLabels = tickLabels(spec.x, provisionalX);
  const lastX = xLabels.length > 0 ? xLabels[xLabels.length - 1]!.text.length : 1;
  const right = Math.max(12, Math.ceil((lastX * CHAR_PX) / 2) + 6);
  let plotWidth = spec.width - left - right;
  let plotHeight = spec.plotHeight;
  if (spec.square === true) plotWidth = plotHeight = Math.min(plotWidth, plotHeight);
  const width = left + plotWidth + right;
  const sx = makeScale(spec.x, [left, left + plotWidth]);
  const sy = makeScale(spec.y, [top + plotHeight, top]);
  const plot = { left, top, width: plotWidth, height: plotHeight };
  const axisY = top + plotHeight;
  const xTicks = tickLabels(spec.x, sx)
    .map(({ value, text }) => {
      const x = sx(value).toFixed(1);
      const label = text === '' ? '' : `<text class="tick-x${spec.x.log === true ? ' log' : ''}" x="${x}" y="${axisY + 16}" text-anchor="middle">${escapeHtml(text)}</text>`;
      return `<line class="tick" x1="${x}" x2="${x}" y1="${axisY}" y2="${axisY + 4}"/>${label}`;
    })
    .join('');
  const yTicks = tickLabels(spec.y, sy)
    .map(({ value, text }) => {
      const y = sy(value).toFixed(1);
      // Log axes label only some ticks (d3's format gives the others ""): their lines stay, as minor ticks.
      const label = text === '' ? '' : `<text class="tick-y${spec.y.log === true ? ' log' : ''}" x="${left - 6}" y="${(Number(y) + 4).toFixed(1)}" text-anchor="end">${escapeHtml(text)}</text>`;
      return `<line class="grid" x1="${left}" x2="${left + plotWidth}" y1="${y}" y2="${y}"/>${label}`;
    })
    .join('');
  const belowTop = axisY + 40;
  const height = belowTop + (spec.belowHeight ?? 0);
  const clipId = `clip-${spec.label.replace(/[^a-z0-9]+/gi, '-')}`;
  return (
    `<svg class="plot${spec.className === undefined ? '' : ` ${spec.className}`}" role="img" aria-label="${escapeHtml(spec.label)}" viewBox="0 0 ${width} ${height}" ` +
    `style="max-width:${width}px" preserveAspectRatio="xMinYMin meet">` +
    `<clipPath id="${clipId}"><rect x="${left}" y="${top}" width="${plotWidth}" height="${plotHeight}"/></clipPath>` +
    yTicks +
    `<g clip-path="url(#${clipId})">${spec.body(sx, sy, plot)}</g>` +
    `<rect class="plot-area" x="${left}" y="${top}" width="${plotWidth}" height="${plotHeight}"/>` +
    xTicks +
    `<text class="axis-label" x="${(left + plotWidth / 2).toFixed(1)}" y="${axisY + 34}" text-anchor="middle">${escapeHtml(spec.x.label)}</text>` +
    `<text class="axis-label" x="14" y="${top + plotHeight / 2}" transform="rotate(-90 14 ${top + plotHeight / 2})" text-anchor="middle">${escapeHtml(spec.y.label)}</text>` +
    (spec.below === undefined ? '' : spec.below(sx, plot, belowTop)) +
    `</svg>`
  );
}

/** Path through the finite points (x(k), values[k]); a non-finite value breaks the line. */
export function polyline(x: (k: number) => number, values: ArrayLike<number>, sx: Scale, sy: Scale): string {
  let d = '';
  for (let k = 0; k < values.length; k++) {
    const v = values[k]!;
    if (Number.isFinite(v)) d += `${k === 0 || !Number.isFinite(values[k - 1]!) ? 'M' : 'L'}${sx(x(k)).toFixed(1)} ${sy(v).toFixed(1)}`;
  }
  return d;
}


/** Decades around the positive values: the domain of a logarithmic axis. */
function decades(values: number[]): [number, number] {
  const positive = values.filter((v) => v > 0 && Number.isFinite(v));
  if (positive.length === 0) return [1, 10];
  const low = 10 ** Math.floor(Math.log10(Math.min(...positive)));
  const high = 10 ** Math.ceil(Math.log10(Math.max(...positive)));
  return [low, high > low ? high : low * 10];
}

/** Series of points as one chart (class `plot`): lines, dots, bands and vertical markers. */
export function lineChart(series: readonly ChartSeries[], options: ChartOptions): string {
  const xLog = options.xLog === true;
  const yLog = options.yLog === true;
  const drawable = (x: number, y: number) => Number.isFinite(x) && Number.isFinite(y) && (!xLog || x > 0) && (!yLog || y > 0);
  const xs: number[] = [];
  const ys: number[] = [];
  for (const s of series) {
    for (let i = 0; i < s.x.length; i++) {
      if (drawable(s.x[i]!, s.y[i]!)) {
        xs.push(s.x[i]!);
        ys.push(s.y[i]!);
      }
    }
  }
  const xDomain = xLog ? decades(xs) : extent(xs);
  const yDomain = yLog ? decades(ys) : extent(ys);
  return chart({
    label: options.title,
    width: options.width ?? 760,
    plotHeight: (options.height ?? 300) - 50,
    x: { label: options.xLabel, domain: xDomain, log: xLog },
    y: { label: options.yLabel, domain: yDomain, log: yLog },
    body: (sx, sy, plot) => {
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
            const point = `${sx(x).toFixed(1)} ${sy(y).toFixed(1)}`;
            d += kind === 'dots' ? `M${point}h0.1` : `${pen ? 'L' : 'M'}${point}`;
            pen = true;
          }
          if (kind === 'band' && d !== '') d += 'Z';
          return `<path class="${kind}" d="${d}">${s.label === undefined ? '' : `<title>${escapeHtml(s.label)}</title>`}</path>`;
        })
        .join('');
      const markers = (options.markers ?? [])
        .filter((m) => m.x >= xDomain[0] && m.x <= xDomain[1])
        .map((m) => {
          const x = sx(m.x).toFixed(1);
          return `<line class="marker" x1="${x}" x2="${x}" y1="${plot.top}" y2="${plot.top + plot.height}"/><text class="marker-label" x="${(Number(x) + 3).toFixed(1)}" y="${plot.top + 12}">${escapeHtml(m.label)}</text>`;
        })
        .join('');
      return paths + markers;
    },
  });
}

export const CHART_CSS = `body { font: 14px/1.4 system-ui, sans-serif; margin: 24px; color: #1c1c1c; background: #fafafa; }
h1 { font-size: 20px; } h2 { font-size: 16px; margin-top: 28px; }
table { border-collapse: collapse; } th, td { text-align: left; padding: 3px 12px 3px 0; vertical-align: top; } th { font-weight: 600; }
table.grid td, table.grid th { border-bottom: 1px solid #ddd; text-align: right; } table.grid th:first-child, table.grid td:first-child { text-align: left; }
.plot { display: block; width: 100%; height: auto; background: #fff; margin: 6px 0; overflow: visible; }
.plot text { font-size: ${FONT_PX}px; fill: #333; } .plot .axis-label { font-size: 13px; }
.plot-area { fill: none; stroke: #999; } .grid { stroke: #e6e6e6; } .tick { stroke: #999; }
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
