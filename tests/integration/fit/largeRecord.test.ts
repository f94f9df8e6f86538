/**
 * A site's whole history fits through every line a fit record crosses. A real fit record of R's
 * Theoph (datasets::Theoph; 12 subjects with 11 levels each, so more values a subject than sparse
 * TDM data) is grown to 20,000 subjects by repeating its subjects and levels under new IDs; the
 * record must pass the worker line's check (the fit job's answer; the kept seed's diagnostics job
 * carries it back to a worker) and stay within the fit record's file limit. 5 million values, the
 * former worker limit, stopped a fit of about 18,000 sparse-data patients after it had run.
 */
import { mkdtempSync } from 'node:fs';
import { tmpdir } from 'node:os';
import * as path from 'node:path';
import { describe, expect, it } from 'vitest';
import { guardPlainData, MAX_NODES, WORKER_LIMITS } from '../../../main/protocol/guard.js';
import { MAX_FIT_RECORD_BYTES } from '../../../main/services/fileGuard.js';
import { fitTheophInto } from '../../helpers/theophFit.js';

describe('a fit record of 20,000 patients', () => {
  it('passes the worker line and stays within the fit record limit', async () => {
    const record = await fitTheophInto(mkdtempSync(path.join(tmpdir(), 'plateau-large-')));
    // Draws are kept for the parameters with BSV only (CL, V, ka here).
    expect(Object.keys(record.individual[0].draws).sort()).toEqual(['CL', 'V', 'ka']);
    const n = 20_000;
    const individual = Array.from({ length: n }, (_, k) => ({ ...record.individual[k % 12], subject: `S${k}` }));
    const byId = new Map<string, unknown[]>();
    for (const o of record.diagnostics.observations) byId.set(o.subject, [...(byId.get(o.subject) ?? []), o]);
    const ids = [...byId.keys()];
    const observations = individual.flatMap((s, k) => (byId.get(ids[k % ids.length]) as object[]).map((o) => ({ ...o, subject: s.subject })));
    const large = { ...record, nSubjects: n, individual, diagnostics: { ...record.diagnostics, observations } };
    expect(guardPlainData(large, WORKER_LIMITS)).toBeUndefined();
    // The renderer's limit would have refused it: the worker line needs its own.
    expect(guardPlainData(large, { ...WORKER_LIMITS, maxNodes: MAX_NODES })).toMatch(/more than 5000000 values/);
    expect(JSON.stringify(large).length).toBeLessThan(MAX_FIT_RECORD_BYTES);
  }, 120_000);
});
