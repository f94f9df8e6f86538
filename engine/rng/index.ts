/** Seeded named random streams and the standard normal distribution. */
export { createStreams, type RngRoot, type RngStream, type StreamPathPart } from './streams.js';
export { logNormalCdf, logNormalPdf, normalCdf, normalPdf, normalQuantile, normalSurvival } from './normal.js';
