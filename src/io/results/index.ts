// Result rows of a replay or live run: CSV or JSON Lines files (or standard output), decimated on the absolute index.
export {
  createResultWriter,
  RESULT_COLUMNS,
  RESULT_DECIMALS,
  type ResultBlock,
  type ResultFormat,
  type ResultWriter,
  type ResultWriterOptions,
} from './result-writer.js';
