/**
 * The post-fit steps on 1, 2 and 3 threads (engine/posthoc/threads.ts with the worker_threads host
 * of main/worker/saemThreads.ts) give the same numbers to the last bit: every array of the result
 * (modes, Laplace covariances, conditional means, covariances, quantiles and kept draws,
 * importance-sampling log-likelihoods, PRED / IPRED / IWRES / NPDE, the simulations' summaries)
 * and every number of the fit record's post-fit fields. Each subject draws from its own random
 * stream and every sum over subjects is done in subject order on the calling thread, which makes
 * this hold (the issue's requirement; an identity needs no outside reference). Data: the
 * simulated sparse 2-cmt TDM design (censored levels, a parameter without BSV, combined error;
 * invented data, labelled as simulation) and nlme's Phenobarb (R package nlme, dataset
 * Phenobarb).
 */
import { readFileSync } from 'node:fs';
import * as path from 'node:path';
import { beforeAll, describe, expect, it } from 'vitest';
import { parseCanonicalCsv } from '../../../engine/data/canonicalCsv.js';
import { posthocRecordFields, runPosthoc, runPosthocOnThreads, type PosthocOptions, type PosthocResult } from '../../../engine/posthoc/index.js';
import { runSaem, type SaemResult } from '../../../engine/saem/saem.js';
import { compileModel, type CompiledModel } from '../../../engine/stats/model.js';
import { fitDataset, type FitOutcome } from '../../../main/services/fitService.js';
import { addPosthoc } from '../../../main/services/fitPosthoc.js';
import { workerThreadHost } from '../../../main/worker/saemThreads.js';
import { phenobarbSpec, referenceDataset, sparseTdmSpec } from '../../helpers/sparseSpecs.js';

const repo = path.resolve(__dirname, '../../..');
const SHORT = { searchMinIterations: 60, searchMaxIterations: 120, averagingIterations: 40, settleWindow: 20, annealingIterations: 20 };
// Fewer samples and replicates than the defaults keep the test short; the identity does not depend on them.
const POSTHOC: Partial<PosthocOptions> = { now: () => 0, importance: { samplesPerSubject: 2000 }, diagnostics: { replicates: 100 } };

/** Every number and typed array of `a` and `b`, bit for bit (Object.is: NaN equals NaN, -0 differs from 0). */
function sameBits(a: unknown, b: unknown, where = 'result'): void {
  if (ArrayBuffer.isView(a)) {
    expect(ArrayBuffer.isView(b), where).toBe(true);
    const x = a as unknown as ArrayBufferView, y = b as unknown as ArrayBufferView;
    expect(y.constructor.name, where).toBe(x.constructor.name);
    expect(Buffer.from(y.buffer, y.byteOffset, y.byteLength).equals(Buffer.from(x.buffer, x.byteOffset, x.byteLength)), where).toBe(true);
    return;
  }
  if (typeof a === 'number') {
    expect(Object.is(a, b), `${where}: ${a} vs ${String(b)}`).toBe(true);
    return;
  }
  if (a === null || typeof a !== 'object') {
    expect(b, where).toBe(a);
    return;
  }
  expect(b !== null && typeof b === 'object', where).toBe(true);
  const keys = Object.keys(a).sort();
  expect(Object.keys(b as object).sort(), where).toEqual(keys);
  for (const k of keys) {
    if (k === 'model' || k === 'phiOf' || k === 'logPrior' || k === 'logLik' || k === 'logJoint') continue;
    sameBits((a as Record<string, unknown>)[k], (b as Record<string, unknown>)[k], `${where}.${k}`);
  }
}

function samePosthoc(model: CompiledModel, a: PosthocResult, b: PosthocResult, seed: number): void {
  sameBits(a, b);
  sameBits(posthocRecordFields(model, a, seed), posthocRecordFields(model, b, seed), 'record');
}

describe('post-fit steps on several threads', () => {
  let sparse: { model: CompiledModel; fit: SaemResult };
  let phenobarb: { model: CompiledModel; fit: SaemResult };
  beforeAll(async () => {
    const m1 = compileModel(sparseTdmSpec, referenceDataset('tdm-sparse/tdm_sparse.csv'));
    sparse = { model: m1, fit: await runSaem(m1, { seed: 4, settings: SHORT }) };
    const m2 = compileModel(phenobarbSpec, parseCanonicalCsv(readFileSync(path.join(repo, 'resources/validation/reference/phenobarb/phenobarb.csv'), 'utf8')));
    phenobarb = { model: m2, fit: await runSaem(m2, { seed: 7, settings: SHORT }) };
  }, 120_000);

  it('sparse TDM design (simulation): 1, 2 and 3 threads give the one-thread result bit for bit', async () => {
    const { model, fit } = sparse;
    const options = { ...POSTHOC, seed: 4, startPhi: fit.individualPhiMean };
    const one = runPosthoc(model, fit.theta, options);
    // The design has censored levels: their NPDE imputations are part of the comparison.
    expect(one.diagnostics!.observations.some((o) => o.imputed !== undefined)).toBe(true);
    for (const threads of [1, 2, 3]) {
      // Counting the threads started shows the blocks really ran elsewhere (the caller keeps one).
      const real = workerThreadHost(threads);
      let started = 0;
      const counting = { threads, start: (init: Parameters<typeof real.start>[0]) => (started++, real.start(init)) };
      samePosthoc(model, one, await runPosthocOnThreads(model, fit.theta, { ...options, threads: counting }), 4);
      expect(started).toBe(threads - 1);
    }
  }, 120_000);

  it("nlme's Phenobarb: 1, 2 and 3 threads give the one-thread result bit for bit", async () => {
    const { model, fit } = phenobarb;
    const options = { ...POSTHOC, seed: 7, startPhi: fit.individualPhiMean };
    const one = runPosthoc(model, fit.theta, options);
    for (const threads of [2, 3]) samePosthoc(model, one, await runPosthocOnThreads(model, fit.theta, { ...options, threads: workerThreadHost(threads) }), 7);
  }, 120_000);

  it('addPosthoc: the fit record with its post-fit fields and degeneracy report is the same on 1 and 2 threads', async () => {
    const outcome: FitOutcome = await fitDataset(referenceDataset('tdm-sparse/tdm_sparse.csv'), sparseTdmSpec, { seed: 2, settings: SHORT });
    const posthoc = { importance: { samplesPerSubject: 1000 }, diagnostics: { replicates: 50 }, now: () => 0 };
    const one = await addPosthoc(outcome, { posthoc, threads: 1 });
    const two = await addPosthoc(outcome, { posthoc, threads: workerThreadHost(2) });
    sameBits(one, two, 'record');
    expect(JSON.stringify(two)).toBe(JSON.stringify(one));
  }, 120_000);

  it('a post-fit thread that cannot start, or that fails in a task, fails the post-fit steps with its reason (no hang)', async () => {
    const { model, fit } = sparse;
    const options = { ...POSTHOC, seed: 4, diagnostics: false as const, linearisedSe: false };
    const cannotStart = { threads: 2, start: () => ({ ready: Promise.reject(new Error('no threads here')), terminate: () => undefined }) };
    await expect(runPosthocOnThreads(model, fit.theta, { ...options, threads: cannotStart })).rejects.toThrow(/no threads here/);
    // A block beyond the last subject: its first task throws inside the thread.
    const real = workerThreadHost(2);
    const broken = { threads: 2, start: (init: Parameters<typeof real.start>[0]) => real.start({ ...init, to: init.to + 5 }) };
    await expect(runPosthocOnThreads(model, fit.theta, { ...options, threads: broken })).rejects.toThrow(/a post-fit thread failed: post-fit thread 1/);
  }, 60_000);
});
