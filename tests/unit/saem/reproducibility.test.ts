import { describe, expect, it } from 'vitest';
import { createSaemRun, runSaem, SaemCancelledError } from '../../../engine/saem/saem.js';
import { compileModel } from '../../../engine/stats/model.js';
import { parseModelSpec } from '../../../engine/spec/modelSpec.js';
import { simulateDataset, tdmDesigns } from './simulate.js';

// Simulated data (invented, for these tests only).
const truth = parseModelSpec({
  structure: '1cmt',
  parameters: { CL: { typical: 4, bsv: 0.3 }, V: { typical: 40, bsv: 0.2 } },
  residual: { model: 'proportional', b: 0.15 },
});
const dataset = simulateDataset(truth, tdmDesigns(20, 5), 17, 2);
const short = { searchMinIterations: 30, searchMaxIterations: 40, averagingIterations: 20 };

describe('reproducibility', () => {
  it('gives bit-identical trajectories and estimates from one seed', async () => {
    const model = compileModel(truth, dataset);
    const r1 = await runSaem(model, { seed: 42, settings: short });
    const r2 = await runSaem(compileModel(truth, dataset), { seed: 42, settings: short });
    expect(r1.trajectory.length).toBeGreaterThan(0);
    expect(Buffer.from(r1.trajectory.buffer).equals(Buffer.from(r2.trajectory.buffer))).toBe(true);
    expect(Buffer.from(r1.individualPhiMean.buffer).equals(Buffer.from(r2.individualPhiMean.buffer))).toBe(true);
    const r3 = await runSaem(model, { seed: 43, settings: short });
    expect(Buffer.from(r1.trajectory.buffer).equals(Buffer.from(r3.trajectory.buffer))).toBe(false);
    expect(r1.seed).toBe(42);
  });
  it('the step-by-step run and runSaem agree exactly', async () => {
    const model = compileModel(truth, dataset);
    const run = createSaemRun(model, { seed: 5, settings: short });
    while (!run.done) run.step();
    const a = run.finish();
    const b = await runSaem(model, { seed: 5, settings: short });
    expect(Array.from(a.estimates)).toEqual(Array.from(b.estimates));
  });
});

describe('cancellation and progress', () => {
  it('reports progress every iteration with phase and estimates, and stops on abort', async () => {
    const model = compileModel(truth, dataset);
    const controller = new AbortController();
    const seen: string[] = [];
    const promise = runSaem(model, {
      seed: 1,
      settings: short,
      signal: controller.signal,
      onProgress: (p) => {
        seen.push(`${p.phase}:${p.iteration}`);
        expect(p.estimates.length).toBe(p.estimateNames.length);
        if (p.iteration === 7) controller.abort();
      },
    });
    await expect(promise).rejects.toBeInstanceOf(SaemCancelledError);
    expect(seen).toEqual([1, 2, 3, 4, 5, 6, 7].map((k) => `search:${k}`));
  });
  it('an abort from outside (a timer) lands mid-fit when the host is given control', async () => {
    const model = compileModel(truth, dataset);
    const controller = new AbortController();
    setTimeout(() => controller.abort(), 5);
    let iterations = 0;
    const promise = runSaem(model, {
      seed: 1,
      settings: { ...short, searchMinIterations: 5000, searchMaxIterations: 5000 },
      signal: controller.signal,
      yieldToHost: () => new Promise<void>((resolve) => setImmediate(resolve)),
      yieldEveryMs: 1,
      onProgress: (p) => void (iterations = p.iteration),
    });
    await expect(promise).rejects.toBeInstanceOf(SaemCancelledError);
    expect(iterations).toBeLessThan(5000);
  });
  it('marks the phase boundary', async () => {
    const model = compileModel(truth, dataset);
    const phases: string[] = [];
    const r = await runSaem(model, { seed: 1, settings: short, onProgress: (p) => void phases.push(p.phase) });
    expect(phases.length).toBe(r.iterations);
    expect(phases.filter((x) => x === 'search').length).toBe(r.searchEnd);
    expect(r.iterations - r.searchEnd).toBe(20);
  });
});
