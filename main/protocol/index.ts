/** The protocol between renderer, main and worker (docs/architecture.md, "Protocol"). */
export * from './guard.js';
export * from './errors.js';
export * from './schemas.js';
export * from './worker.js';
export * from './validate.js';
export type * from './bridge.js';
export { BRIDGE_METHODS } from './bridge.js';
