/**
 * The engine worker process on its own (real child processes): each job kind gives what the
 * same engine call gives in this process; a synchronous step is cancelled at once; the time
 * limit and silence are enforced; errors cross as ErrorValues; the CLI's fit path matches.
 */
import { readFileSync } from 'node:fs';
import * as path from 'node:path';
import { beforeAll, describe, expect, it } from 'vitest';
import { adviseDose } from '../../../engine/dosing/advise.js';
import { parsePatient } from '../../../engine/dosing/patient.js';
import { loadPopulationModel } from '../../../engine/dosing/population.js';
import { parseTarget } from '../../../engine/dosing/targets.js';
import { parseModelSpec } from '../../../engine/spec/modelSpec.js';
import { ENGINE_VERSION } from '../../../engine/version.js';
import { simulateDataset } from '../../../main/cli/simulation.js';
import { loadDataset } from '../../../main/services/datasetLoader.js';
import { EngineWorker, runEngineJob } from '../../../main/services/engineClient.js';
import { fitFilesInWorker } from '../../../main/services/fitRunner.js';
import { fitDataset } from '../../../main/services/fitService.js';
import { handleParseMessage } from '../../../main/worker/parseWorker.js';
import { engineWorkerPath, ensureBuilt, repoRoot, resourcesDir } from '../services/build.js';

beforeAll(() => ensureBuilt(), 300_000);
const demo = (f: string) => path.join(resourcesDir, 'demo', f);
const json = (f: string) => JSON.parse(readFileSync(f, 'utf8'));
const worker = { modulePath: engineWorkerPath };
const SHORT = { searchMinIterations: 30, searchMaxIterations: 40, averagingIterations: 20 };

describe('engine worker', () => {
  it('runs parse, simulate and advise jobs with the same results as direct engine calls', async () => {
    const w = await EngineWorker.start(worker);
    try {
      const bytes = new Uint8Array(readFileSync(path.join(repoRoot, 'tests/fixtures/import/ward7b_two_sheets.xlsx')));
      const parsed = (await w.run({ kind: 'parse', fileName: 'ward7b_two_sheets.xlsx', bytes, options: { dateOrder: 'dayFirst' } })) as { report: { summary: unknown } };
      const direct = handleParseMessage({ type: 'parse', id: 'x', fileName: 'ward7b_two_sheets.xlsx', bytes, options: { dateOrder: 'dayFirst' } });
      expect(direct.type).toBe('result');
      if (direct.type === 'result') expect(parsed.report.summary).toEqual(direct.analysis.report.summary);

      const dataset = await loadDataset(demo('ward-levels.csv'));
      const spec = json(demo('ward-model.json'));
      const sim = (await w.run({ kind: 'simulate', dataset: JSON.parse(JSON.stringify(dataset)), spec })) as { subjects: { id: string; predictedMgL: number[] }[] };
      const simDirect = simulateDataset(parseModelSpec(spec), dataset);
      expect(sim.subjects[0].predictedMgL).toEqual(Array.from(simDirect.subjects[0].predictedMgL));

      const model = json(path.join(resourcesDir, 'models/example-vancomycin-1cmt.json'));
      const patient = json(demo('patient.json'));
      const target = json(path.join(resourcesDir, 'targets/vancomycin-auc24.json'));
      const caution = json(path.join(resourcesDir, 'cautions/dosing.json')).text as string;
      const advice = (await w.run({ kind: 'advise', model, patient, target, caution, seed: 3, draws: 300, overrideBlocks: true })) as Record<string, unknown>;
      const adviceDirect = adviseDose({ population: loadPopulationModel(model), patient: parsePatient(patient), target: parseTarget(target), caution, seed: 3, nDraws: 300, overrideBlocks: true, engineVersion: ENGINE_VERSION });
      expect(advice).toEqual(JSON.parse(JSON.stringify(adviceDirect)));
      expect(advice.caution).toBe(caution);
    } finally {
      w.kill();
    }
  }, 120_000);

  it('turns engine errors into error values and keeps serving', async () => {
    const w = await EngineWorker.start(worker);
    try {
      await expect(w.run({ kind: 'fit', dataset: { subjects: [{ id: 'A', doses: [], observations: [] }], covariateNames: [] }, spec: json(demo('ward-model.json')) })).rejects.toMatchObject({ kind: 'data' });
      await expect(w.run({ kind: 'simulate', dataset: { subjects: [], covariateNames: [] }, spec: { structure: 'nope' } })).rejects.toMatchObject({ kind: expect.stringMatching(/spec|data/) });
      expect(await w.run({ kind: 'probe', mode: 'echo', value: 'still here' })).toBe('still here');
    } finally {
      w.kill();
    }
  }, 60_000);

  it('cancels a synchronous step within 1 s, enforces the time limit and detects a hang', async () => {
    const w = await EngineWorker.start(worker);
    const ac = new AbortController();
    const p = w.run({ kind: 'probe', mode: 'spin', ms: 30_000 }, { signal: ac.signal });
    await new Promise((r) => setTimeout(r, 300));
    const t0 = performance.now();
    ac.abort();
    await expect(p).rejects.toMatchObject({ kind: 'cancelled' });
    expect(performance.now() - t0).toBeLessThan(1000);
    expect(w.alive).toBe(true);
    w.kill();

    await expect(runEngineJob({ kind: 'probe', mode: 'spin', ms: 30_000 }, { ...worker, jobTimeLimitMs: 500 })).rejects.toMatchObject({ kind: 'worker', message: expect.stringMatching(/time limit/) });
    await expect(runEngineJob({ kind: 'probe', mode: 'hang' }, { ...worker, heartbeatTimeoutMs: 1500 })).rejects.toMatchObject({ kind: 'worker', message: expect.stringMatching(/stopped answering/) });
    // The memory limit stops the job, not the process.
    const small = await EngineWorker.start({ ...worker, jobHeapMb: 64 });
    await expect(small.run({ kind: 'probe', mode: 'alloc' })).rejects.toMatchObject({ kind: 'worker', message: expect.stringMatching(/more than 64 MB/) });
    expect(await small.run({ kind: 'probe', mode: 'echo', value: 1 })).toBe(1);
    small.kill();
  }, 60_000);

  it('cancelling a fit that runs on threads ends its block threads too (the process goes idle, its thread count drops back)', async () => {
    // Linux /proc (the CI and the ward PCs' packaging target are checked on Linux here).
    const threadsOf = (pid: number) => Number(/Threads:\s+(\d+)/.exec(readFileSync(`/proc/${pid}/status`, 'utf8'))![1]);
    const cpuOf = (pid: number) => {
      const f = readFileSync(`/proc/${pid}/stat`, 'utf8').split(') ')[1].split(' ');
      return Number(f[11]) + Number(f[12]);
    };
    const dataset = await loadDataset(demo('ward-levels.csv'));
    // The demo ward made large enough for threads (92 levels x 40 chains >= 1000) and long.
    const spec = { ...json(demo('ward-model.json')), estimation: { chains: 40, searchMinIterations: 5000, searchMaxIterations: 5000 } };
    const w = await EngineWorker.start(worker);
    try {
      const pid = w.pid!;
      const ac = new AbortController();
      const job = w.run({ kind: 'fit', dataset: JSON.parse(JSON.stringify(dataset)), spec, seed: 1, threads: 2, postFit: false }, { signal: ac.signal });
      await new Promise((r) => setTimeout(r, 1500));
      const during = threadsOf(pid);
      ac.abort();
      await expect(job).rejects.toMatchObject({ kind: 'cancelled' });
      await new Promise((r) => setTimeout(r, 1000));
      const c0 = cpuOf(pid);
      await new Promise((r) => setTimeout(r, 1000));
      expect(cpuOf(pid) - c0).toBeLessThanOrEqual(5); // clock ticks (1/100 s): idle
      expect(threadsOf(pid)).toBeLessThanOrEqual(during - 2); // the job thread and its block thread are gone
      expect(w.alive).toBe(true);
    } finally {
      w.kill();
    }
  }, 60_000);

  it('the command line fit path in a worker gives the in-process fit', async () => {
    const record = await fitFilesInWorker({ dataPath: demo('ward-levels.csv'), modelPath: demo('ward-model.json'), seed: 4, settings: SHORT, postFit: false, workerEntry: engineWorkerPath });
    const direct = await fitDataset(await loadDataset(demo('ward-levels.csv')), parseModelSpec(json(demo('ward-model.json'))), { seed: 4, settings: SHORT });
    expect(record.population).toEqual(JSON.parse(JSON.stringify(direct.record.population)));
  }, 60_000);
});
