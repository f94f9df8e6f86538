/**
 * A seeded fit repeated from scratch gives the identical fit record (estimates, SEs, -2LL,
 * individual results, diagnostics), compared by SHA-256 with the timing left out.
 */
import { fitDataset } from '../../services/fitService.js';
import { addPosthoc } from '../../services/fitPosthoc.js';
import { sha256 } from '../suite.js';
import { datasetOf, seedOf, type CheckKind } from './common.js';
import type { CheckRow } from '../types.js';

/** Keys that hold wall-clock times and so legitimately differ between runs. */
const TIMING_KEYS = new Set(['timing', 'timingMs']);

export const canonicalRecordHash = (record: unknown): string => sha256(JSON.stringify(record, (k, v) => (TIMING_KEYS.has(k) ? undefined : v)));

export const reproducibleFit: CheckKind = {
  describe: () => 'identical SHA-256 of the two fit records (timing excluded)',
  async run(spec, ctx) {
    const seed = seedOf(spec);
    const { dataset, spec: model } = await ctx.fits.load(datasetOf(spec));
    const hashes: string[] = [];
    for (let run = 0; run < 2; run++) {
      const outcome = await fitDataset(dataset, model, { seed, ...(ctx.signal ? { signal: ctx.signal } : {}) });
      hashes.push(canonicalRecordHash(await addPosthoc(outcome)));
    }
    const rows: CheckRow[] = [{ quantity: `SHA-256 of the fit record (seed ${seed}), second run against first`, reference: hashes[0], found: hashes[1], limit: 'identical', pass: hashes[0] === hashes[1] }];
    return { rows, found: hashes[0] === hashes[1] ? `identical: ${hashes[0]}` : `DIFFERENT: ${hashes[0]} then ${hashes[1]}` };
  },
};
