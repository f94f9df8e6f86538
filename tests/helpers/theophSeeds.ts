/**
 * A short multi-seed fit of R's Theoph (datasets::Theoph, resources/validation/reference/theoph)
 * shared by the tests that run a fit's seeds in different places (in process, in job threads, in
 * worker processes) and compare the records.
 */
import { readFileSync } from 'node:fs';
import { parseCanonicalCsv } from '../../engine/data/canonicalCsv.js';
import { parseModelSpec } from '../../engine/spec/modelSpec.js';
import { theophCsv } from './theophFit.js';

export const theophSeedsDataset = parseCanonicalCsv(readFileSync(theophCsv, 'utf8'));

export const theophSeedsSpecJson = {
  structure: '1cmt',
  parameters: { CL: { typical: 0.05, bsv: 0.3 }, V: { typical: 0.5, bsv: 0.3 }, ka: { typical: 1.5, bsv: 0.3 } },
  residual: { model: 'additive', a: 1 },
  estimation: { seed: 3, seeds: 3, searchMinIterations: 40, searchMaxIterations: 60, averagingIterations: 30, chains: 2 },
};

export const theophSeedsSpec = parseModelSpec(theophSeedsSpecJson);

/** A record without its wall and CPU times, as JSON data (a worker's or thread's answer is JSON too). */
export function comparableRecord(record: unknown): unknown {
  return JSON.parse(JSON.stringify(record, (k, v) => (k === 'timing' || /Ms$|Seconds$|S$/.test(k) ? undefined : v)));
}
