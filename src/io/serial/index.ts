// Byte sources: the interface, the serial-port implementation with reconnection, and a manual double for tests.
export { isLinkEvent, type ByteSource, type ByteSourceEvent, type LinkEvent } from './byte-source.js';
export {
  createSerialByteSource,
  resolveSerialSourceOptions,
  retryDelayFor,
  SERIAL_SOURCE_DEFAULTS,
  type SerialByteSource,
  type SerialPortHandle,
  type SerialSourceConfig,
  type SerialSourceOptions,
} from './serial-source.js';
export { createManualByteSource, type ManualByteSource } from './manual-source.js';
