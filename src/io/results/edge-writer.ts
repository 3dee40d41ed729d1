// Writer of positions at trigger edges (listen --latch-out): one CSV row per axis and edge, through a temporary
// file renamed on close, so the file is either complete or absent.
import { alarmText } from '../../core/index.js';
import { openFileSink, type OutputSink } from '../capture/output-file.js';

/** The columns, in order (docs/trigger-edges.md). */
export const EDGE_COLUMNS = ['t', 'sample_time', 'axis', 'line', 'edge', 'position_m', 'uncertainty_m', 'velocity_m_s', 'alarms'] as const;

/**
 * Decimal places: t to 1 ps and the sample time to 1e-9 period (edges are timed to 2^-16 of a period), position
 * and its bound to 1 fm (the bound is typically 1e-11 m), velocity to 1 nm/s.
 */
export const EDGE_DECIMALS = { t: 12, sampleTime: 9, positionM: 15, velocityMS: 9 } as const;

/** One edge row: what `createLiveEdgeLatch` hands out. */
export interface EdgeRow {
  readonly timeS: number;
  readonly sampleTime: number;
  readonly axis: string;
  readonly line: number;
  readonly rising: boolean;
  readonly positionM: number;
  readonly uncertaintyM: number;
  readonly velocityMS: number;
  readonly flags: number;
}

export interface EdgeWriter {
  readonly path: string;
  readonly rowsWritten: number;
  write(rows: readonly EdgeRow[]): Promise<void>;
  /** Flushes and renames the temporary file to `path`. */
  close(): Promise<void>;
  /** Removes the temporary file. */
  abort(): Promise<void>;
}

const number = (value: number, decimals: number) => (Number.isFinite(value) ? value.toFixed(decimals) : String(value));

/** Opens `path` for edge rows; the header goes first, so a run without edges leaves a file with the header only. */
export async function createEdgeWriter(path: string): Promise<EdgeWriter> {
  const sink: OutputSink = await openFileSink(path);
  let rowsWritten = 0;
  let text = EDGE_COLUMNS.join(',') + '\n';
  let finished = false;
  const flush = async () => {
    const bytes = Buffer.from(text, 'utf8');
    text = '';
    await sink.write(bytes, bytes.length);
  };
  return {
    path,
    get rowsWritten() {
      return rowsWritten;
    },
    async write(rows) {
      if (finished) throw new Error(`${path}: the edge writer is closed`);
      for (const row of rows) {
        text +=
          `${number(row.timeS, EDGE_DECIMALS.t)},${number(row.sampleTime, EDGE_DECIMALS.sampleTime)},${row.axis},${row.line},` +
          `${row.rising ? 'rising' : 'falling'},${number(row.positionM, EDGE_DECIMALS.positionM)},${number(row.uncertaintyM, EDGE_DECIMALS.positionM)},` +
          `${number(row.velocityMS, EDGE_DECIMALS.velocityMS)},${alarmText(row.flags)}\n`;
        rowsWritten++;
      }
      if (text.length > 0) await flush();
    },
    async close() {
      if (finished) throw new Error(`${path}: the edge writer is closed`);
      finished = true;
      if (text.length > 0) await flush();
      await sink.commit();
    },
    async abort() {
      finished = true;
      await sink.discard();
    },
  };
}
