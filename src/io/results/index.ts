// Result rows of a replay or live run: CSV or JSON Lines files (or standard output), decimated on the absolute index;
// positions at trigger edges as CSV.
export {
  createResultWriter,
  RESULT_COLUMNS,
  RESULT_COLUMNS_WITH_POWER,
  RESULT_DECIMALS,
  type ResultBlock,
  type ResultFileWriter,
  type ResultFormat,
  type ResultWriter,
  type ResultWriterOptions,
} from './result-writer.js';
export { createEdgeWriter, EDGE_COLUMNS, EDGE_DECIMALS, type EdgeRow, type EdgeWriter } from './edge-writer.js';
