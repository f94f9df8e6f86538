/**
 * One fit on 1, 2 and 3 threads (engine/saem/threads.ts with the worker_threads host of
 * main/worker/saemThreads.ts) gives the same numbers to the last bit: every estimate, the whole
 * trajectory, the individual means and the acceptance rates. The per-subject random streams and
 * the subject-then-chain order of every sum make this hold (the requirement; no outside
 * reference is needed for an identity). Fits: the simulated sparse 2-cmt TDM design (censored
 * levels, a parameter without BSV moved by the Newton step, combined error) and nlme's Phenobarb.
 */
import { readFileSync } from 'node:fs';
import * as path from 'node:path';
import { describe, expect, it } from 'vitest';
import { parseCanonicalCsv } from '../../../engine/data/canonicalCsv.js';
import { runSaem, type SaemResult } from '../../../engine/saem/saem.js';
import { subjectRanges } from '../../../engine/saem/threads.js';
import { compileModel } from '../../../engine/stats/model.js';
import { workerThreadHost } from '../../../main/worker/saemThreads.js';
import { phenobarbSpec, referenceDataset, sparseTdmSpec } from '../../helpers/sparseSpecs.js';

const repo = path.resolve(__dirname, '../../..');

function same(a: SaemResult, b: SaemResult): void {
  expect(b.iterations).toBe(a.iterations);
  expect(Array.from(b.estimates)).toEqual(Array.from(a.estimates));
  expect(Buffer.from(b.trajectory.buffer).equals(Buffer.from(a.trajectory.buffer))).toBe(true);
  expect(Buffer.from(b.individualMean.buffer).equals(Buffer.from(a.individualMean.buffer))).toBe(true);
  expect(b.acceptance).toEqual(a.acceptance);
}

describe('one fit on several threads', () => {
  it('sparse TDM design (simulation): 1, 2 and 3 threads give identical fits', async () => {
    const model = compileModel(sparseTdmSpec, referenceDataset('tdm-sparse/tdm_sparse.csv'));
    const settings = { searchMinIterations: 60, searchMaxIterations: 120, averagingIterations: 40, settleWindow: 20, annealingIterations: 20 };
    const one = await runSaem(model, { seed: 4, settings });
    for (const threads of [2, 3]) same(one, await runSaem(model, { seed: 4, settings, threads: workerThreadHost(threads) }));
  }, 120_000);

  it("nlme's Phenobarb: 1 and 3 threads give identical fits", async () => {
    const model = compileModel(phenobarbSpec, parseCanonicalCsv(readFileSync(path.join(repo, 'resources/validation/reference/phenobarb/phenobarb.csv'), 'utf8')));
    const settings = { searchMinIterations: 60, searchMaxIterations: 120, averagingIterations: 40, settleWindow: 20, annealingIterations: 20 };
    same(await runSaem(model, { seed: 7, settings }), await runSaem(model, { seed: 7, settings, threads: workerThreadHost(3) }));
  }, 120_000);

  it('blocks cover every subject once, in order, at least 2 subjects each', () => {
    const model = compileModel(sparseTdmSpec, referenceDataset('tdm-sparse/tdm_sparse.csv'));
    for (const t of [1, 2, 3, 7, 200]) {
      const r = subjectRanges(model, t);
      expect(r[0].from).toBe(0);
      expect(r[r.length - 1].to).toBe(model.nSubjects);
      for (let k = 1; k < r.length; k++) expect(r[k].from).toBe(r[k - 1].to);
      for (const b of r) expect(b.to - b.from).toBeGreaterThanOrEqual(2);
      expect(r.length).toBe(Math.min(t, Math.floor(model.nSubjects / 2)));
    }
  });

  it('a model with its own structural function stays on the calling thread', async () => {
    const model = compileModel(phenobarbSpec, parseCanonicalCsv(readFileSync(path.join(repo, 'resources/validation/reference/phenobarb/phenobarb.csv'), 'utf8')));
    const custom = compileModel(phenobarbSpec, model.dataset, { structuralModel: model.structural });
    expect(custom.catalogueStructure).toBe(false);
    const { createSaemRun } = await import('../../../engine/saem/saem.js');
    const run = createSaemRun(custom, { threads: workerThreadHost(2) });
    expect(run.threads).toBe(1);
    run.close();
  });

  it('a block thread that cannot start, or that fails in a task, fails the fit with its reason (no hang)', async () => {
    const model = compileModel(sparseTdmSpec, referenceDataset('tdm-sparse/tdm_sparse.csv'));
    const settings = { searchMinIterations: 20, searchMaxIterations: 20, averagingIterations: 10, settleWindow: 5, annealingIterations: 5 };
    const real = workerThreadHost(2);
    const cannotStart = { threads: 2, start: () => ({ ready: Promise.reject(new Error('no threads here')), terminate: () => undefined }) };
    await expect(runSaem(model, { seed: 1, settings, threads: cannotStart })).rejects.toThrow(/no threads here/);
    // A block beyond the last subject: its first task throws inside the thread.
    const broken = { threads: 2, start: (init: Parameters<typeof real.start>[0]) => real.start({ ...init, to: init.to + 5 }) };
    await expect(runSaem(model, { seed: 1, settings, threads: broken })).rejects.toThrow(/a fit thread failed: thread 1/);
  }, 60_000);
});
