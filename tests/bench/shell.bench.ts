/**
 * The application shell: engine worker spawn to ready, a round trip through a ready worker
 * (job thread start included), and the fit queue's overhead per job (queue wall time per tiny
 * fit minus the same fit run directly in this process). Figures only; nothing is asserted.
 */
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import * as path from 'node:path';
import { fileURLToPath } from 'node:url';
import { EngineWorker } from '../../main/services/engineClient.js';
import { FitQueue } from '../../main/services/fitQueue.js';
import { fitDataset } from '../../main/services/fitService.js';
import { ProjectStore } from '../../main/services/projectStore.js';

interface Figure { name: string; value: number; unit: string; target?: string; note?: string }

const here = path.dirname(fileURLToPath(import.meta.url));
const distRoot = path.resolve(here, '..', '..'); // dist/ (this file runs as dist/tests/bench/shell.bench.js)
const repoRoot = path.resolve(distRoot, '..');
const workerEntry = path.join(distRoot, 'main', 'worker', 'engineWorker.js');
const resourcesDir = path.join(repoRoot, 'resources');
const TINY = { searchMinIterations: 2, searchMaxIterations: 2, averagingIterations: 2, chains: 1 as const };

const median = (xs: number[]) => [...xs].sort((a, b) => a - b)[Math.floor(xs.length / 2)];

export const suite = {
  name: 'shell',
  async run(): Promise<Figure[]> {
    const spawnMs: number[] = [];
    for (let i = 0; i < 7; i++) {
      const t0 = performance.now();
      const w = await EngineWorker.start({ modulePath: workerEntry });
      spawnMs.push(performance.now() - t0);
      w.kill();
    }
    const w = await EngineWorker.start({ modulePath: workerEntry });
    const echoMs: number[] = [];
    for (let i = 0; i < 15; i++) {
      const t0 = performance.now();
      await w.run({ kind: 'probe', mode: 'echo', value: i });
      echoMs.push(performance.now() - t0);
    }
    w.kill();

    const dir = mkdtempSync(path.join(tmpdir(), 'plateau-bench-'));
    const store = await ProjectStore.open(dir, { create: 'demo', resourcesDir });
    const datasetId = store.project.datasets[0].id;
    const modelId = store.project.models[0].id;
    const dataset = await store.getDataset(datasetId);
    const spec = (await store.getModel(modelId)).spec;
    const directMs: number[] = [];
    for (let i = 0; i < 5; i++) {
      const t0 = performance.now();
      await fitDataset(dataset, spec, { seed: i + 1, settings: TINY });
      directMs.push(performance.now() - t0);
    }
    const K = 8;
    const queue = await FitQueue.open(store, { concurrency: 1, worker: { modulePath: workerEntry } });
    const t0 = performance.now();
    for (let i = 0; i < K; i++) await queue.enqueue({ datasetId, modelId, seeds: [i + 1], settings: TINY, postFit: { run: false } });
    await queue.whenIdle();
    const queueMs = (performance.now() - t0) / K;
    const failed = queue.snapshot().jobs.filter((j) => j.state !== 'done').length;
    const inWorkerMs = [...queue.workerWallMs.values()].reduce((a, b) => a + b, 0) / Math.max(1, queue.workerWallMs.size);
    await queue.close();
    rmSync(dir, { recursive: true, force: true });
    return [
      { name: 'worker spawn to ready (median of 7)', value: median(spawnMs), unit: 'ms', target: '< 300' },
      { name: 'job round trip in a ready worker (median of 15)', value: median(echoMs), unit: 'ms', note: 'the job thread is kept between jobs' },
      { name: 'queue overhead per job', value: queueMs - inWorkerMs, unit: 'ms', target: '< 50', note: `queue wall time per job minus the job's time in its worker; ${K} tiny fits, concurrency 1, worker reused; store reads and writes (fsync) included${failed ? `; ${failed} FAILED` : ''}` },
      { name: 'tiny fit: in the worker vs in this process', value: inWorkerMs - median(directMs), unit: 'ms', note: 'difference of the job itself (cold code in the job thread)' },
    ];
  },
};
