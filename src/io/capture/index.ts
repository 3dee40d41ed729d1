// Capture files: streaming CSV and WAV readers, constant-memory writers, and their error type.
export { openCapture, openCaptureParts } from './open-capture.js';
export { keepCaptureParts, type KeptParts } from './kept-parts.js';
export { createCaptureWriter, type CaptureWriter, type CaptureWriterOptions } from './capture-writer.js';
export { CaptureFormatError, type CaptureFormatErrorDetails } from './errors.js';
export { parseChannelSelector } from './options.js';
export { ADC_FULL_SCALE_KEY, ADC_KEY, RATE_KEY, parseMetadataLine } from './metadata.js';
export { openFileSink, openStreamSink, writeFileAtomically, type OutputSink } from './output-file.js';
export { openTruthFile, type TruthReader } from './truth-reader.js';
export { DEFAULT_BLOCK_SIZE, DEFAULT_READ_CHUNK_BYTES, MAX_BLOCK_SIZE, MAX_READ_CHUNK_BYTES } from './resolved-options.js';
export { MAX_CSV_LINE_BYTES } from './csv-reader.js';
export type {
  BlockSamples,
  Capture,
  CaptureBlock,
  CaptureFormat,
  CaptureInfo,
  ChannelSelector,
  Int16BlockOptions,
  OpenCaptureOptions,
  RateSource,
  SampleEncoding,
} from './types.js';
export { parseEnvironmentLog, readEnvironmentLog } from './environment-log.js';
