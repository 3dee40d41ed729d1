// The fringetally serial wire format (docs/wire-format.md): frame encoder, incremental decoder, text line mode.
export { crc32c } from './crc32c.js';
export {
  WIRE_CRC_BYTES,
  WIRE_EDGE_BYTES,
  WIRE_EDGE_COUNT_BYTES,
  WIRE_EDGE_LEAD_UNITS,
  WIRE_FIXED_HEADER_BYTES,
  WIRE_MAX_CHANNELS,
  WIRE_MAX_EDGE_LINE,
  WIRE_MAX_EDGES_PER_FRAME,
  WIRE_MAX_SAMPLES_PER_FRAME,
  WIRE_OPTIONAL_FIELD_BYTES,
  WIRE_SAMPLE_COUNTER_MODULUS,
  WIRE_SEQUENCE_MODULUS,
  WIRE_SYNC_0,
  WIRE_SYNC_1,
  WIRE_VERSION,
  WIRE_VERSION_2,
  WireEdgeLine,
  WireEdgePolarity,
  WireFlag,
  WireSampleFormat,
  encodeWireFrame,
  wireFrameLength,
  wireFrameLengthOf,
  wireHeaderLength,
  wireMaxFrameLength,
  wireVersionOf,
  type WireEdge,
  type WireFrameHeader,
} from './format.js';
export { NO_EDGES, splitAxis, type InputGap, type SampleArray, type SampleBlock } from './block.js';
export {
  createWireDecoder,
  type WireDecoder,
  type WireDecoderConfig,
  type WireDecoderCounters,
  type WireDecoderOptions,
} from './decoder.js';
export {
  createLineDecoder,
  formatSampleLines,
  type LineDecoder,
  type LineDecoderConfig,
  type LineDecoderCounters,
  type LineDecoderOptions,
  type MalformedLineReason,
} from './line-decoder.js';
