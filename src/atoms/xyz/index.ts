/** Extended XYZ: streaming reader, writer and parallel per-frame map. */
export { readFrames, readFramesFromStream, type ReadOptions } from './reader.js';
export { formatComment, formatFrame, formatNumber, writeFrames } from './writer.js';
export { lastMapStats, mapFrames, type FrameJob, type MapOptions, type MapStats } from './map.js';
export { XyzError, XyzWriteError } from './errors.js';
