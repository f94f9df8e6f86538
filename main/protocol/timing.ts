/**
 * The worker protocol's timing constants (re-exported by worker.ts). Their own module, so the
 * job thread (main/worker/jobThread.ts), which needs only the progress interval, does not load
 * the message schemas and their validation library.
 */

/** Heartbeat period of a worker; main declares it silent after HEARTBEAT_TIMEOUT_MS without one. */
export const HEARTBEAT_INTERVAL_MS = 500;
export const HEARTBEAT_TIMEOUT_MS = 10_000;
/** Progress messages per job at most this often. */
export const PROGRESS_MIN_INTERVAL_MS = 100;
