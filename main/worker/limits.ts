/** Limits for parsing untrusted spreadsheets in the worker process (all overridable per call). */

/** Largest file accepted (bytes). A 50,000-row two-sheet export is about 2-3 MB as .xlsx. */
export const DEFAULT_MAX_FILE_BYTES = 50 * 1024 * 1024;
/** Wall-clock limit for one parse; the worker is killed when it is exceeded. */
export const DEFAULT_PARSE_TIME_LIMIT_MS = 60_000;
/** V8 heap limit of the worker (--max-old-space-size), so a zip bomb cannot take the machine. */
export const DEFAULT_WORKER_HEAP_MB = 2048;
