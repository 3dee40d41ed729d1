// Live link: bytes from a byte source to gap-aware sample blocks, and to positions per axis.
export { followEnvironmentLog } from './environment-follow.js';
export {
  createLinkReader,
  type LinkBlock,
  type LinkDuplicate,
  type LinkGap,
  type LinkReader,
  type LinkReaderOptions,
  type LinkReaderStatus,
} from './link-reader.js';
export {
  LIVE_FIT_DEFAULTS,
  readLink,
  trackLink,
  type LinkOptions,
  type LinkReading,
  type LiveAxes,
  type LiveAxisOptions,
  type LiveFit,
  type LiveReference,
  type LivePositions,
  type LiveReading,
  type TrackLinkOptions,
} from './track-link.js';
export { createLiveEdgeLatch, latchEdges, type LiveEdgeLatch, type LiveEdgePosition } from './edges.js';
