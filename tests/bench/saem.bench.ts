/**
 * SAEM benchmarks: Theoph fit (default settings), the 120-patient sparse design's default
 * multi-seed fit in worker processes beside one seed, whole-process `plateau fit` on Theoph
 * beside R's nlme as a whole process, a 1000-patient sparse two-compartment infusion TDM dataset
 * (invented, simulated) for 500 iterations, scaling over N, peak memory, and nlme on Theoph
 * timed in the same run when Rscript is present.
 */
import { execFileSync, spawnSync } from 'node:child_process';
import { existsSync, mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import * as path from 'node:path';
import { fileURLToPath } from 'node:url';
import { cliServiceRoots } from '../../main/cli/run.js';
import { CoreSlots, machineCores } from '../../main/services/coreSlots.js';
import { addDiagnosticsInWorker, runSeedInWorker } from '../../main/services/fitRunner.js';
import { runSaem } from '../../engine/saem/saem.js';
import { compileModel } from '../../engine/stats/model.js';
import { fitDataset } from '../../main/services/fitService.js';
import { addPosthoc } from '../../main/services/fitPosthoc.js';
import { fitSeeds, seedsAtOnce } from '../../main/services/fitSeeds.js';
import { referenceDataset, sparseTdmSpec, sparseTdmSpecJson } from '../helpers/sparseSpecs.js';
import type { BenchFigure } from './run.js';
import { findRepoFile, tdmDataset, tdmFit, theophDataset, theophSpec, theophSpecJson } from './workloads.js';

/** Wall time of one whole process (ms); throws when it fails. */
function processMs(cmd: string, args: string[], cwd: string): number {
  const t0 = performance.now();
  const r = spawnSync(cmd, args, { cwd, encoding: 'utf8', timeout: 300_000 });
  const ms = performance.now() - t0;
  if (r.status !== 0) throw new Error(`${path.basename(cmd)} ${args[0] ?? ''} exited with ${r.status ?? r.signal}: ${(r.stderr || '').trim().split('\n').slice(-2).join(' ')}`);
  return ms;
}

const median = (xs: number[]) => [...xs].sort((a, b) => a - b)[Math.floor(xs.length / 2)];

/** CPU time of this process (ms): steadier than wall time on a loaded machine. */
function cpuMs(): number {
  const u = process.cpuUsage();
  return (u.user + u.system) / 1000;
}

async function timeFit(model: ReturnType<typeof compileModel>, seed: number, settings = {}): Promise<{ ms: number; cpuMs: number; iterations: number }> {
  const c0 = cpuMs();
  const t0 = performance.now();
  const r = await runSaem(model, { seed, settings });
  return { ms: performance.now() - t0, cpuMs: cpuMs() - c0, iterations: r.iterations };
}

export const suite = {
  name: 'saem',
  async run(): Promise<BenchFigure[]> {
    const figures: BenchFigure[] = [];
    const theoph = theophDataset();
    const theophModel = compileModel(theophSpec, theoph);
    await timeFit(theophModel, 1); // warm-up (JIT)
    const runs: number[] = [];
    const cpuRuns: number[] = [];
    let its = 0;
    for (const seed of [2, 3, 4]) {
      const t = await timeFit(theophModel, seed);
      runs.push(t.ms);
      cpuRuns.push(t.cpuMs);
      its = t.iterations;
    }
    runs.sort((a, b) => a - b);
    cpuRuns.sort((a, b) => a - b);
    const theophMs = runs[1];
    figures.push({ name: 'Theoph fit, default settings (median of 3)', value: theophMs / 1000, unit: 's', target: '< 0.5', note: `${its} iterations, 12 subjects x 5 chains` });
    figures.push({ name: 'Theoph fit, CPU time (median of 3)', value: cpuRuns[1] / 1000, unit: 's', note: "wall time moves with the machine's load" });

    // The sparse 120-patient TDM design (simulated; tests/reference/tdm-sparse): one seed, and the
    // default fit (3 seeds, each with its post-fit steps, run one after the other in this process;
    // worker processes would run them side by side).
    const sparse = referenceDataset('tdm-sparse/tdm_sparse.csv');
    const sparseModel = compileModel(sparseTdmSpec, sparse);
    const single = await timeFit(sparseModel, 1);
    figures.push({ name: 'sparse TDM, 120 patients, one seed: estimation', value: single.ms / 1000, unit: 's', target: '< 2', note: `${single.iterations} iterations, 4 chains per patient; CPU ${(single.cpuMs / 1000).toFixed(2)} s` });
    {
      const c0 = cpuMs();
      const t0 = performance.now();
      await addPosthoc(await fitDataset(sparse, sparseTdmSpec, { seed: 1 }));
      figures.push({ name: 'sparse TDM, 120 patients, one seed: estimation + post-fit', value: (performance.now() - t0) / 1000, unit: 's', note: `CPU ${((cpuMs() - c0) / 1000).toFixed(2)} s` });
    }
    {
      // The default fit as `plateau fit` and the app's queue run it: each seed (estimation +
      // post-fit) in its own engine worker process, as many at once as there are cores.
      const workerEntry = cliServiceRoots().workerEntry;
      const inWorkers = async (seeds: number[]) => {
        const t0 = performance.now();
        let workerCpuMs = 0;
        const o = { specJson: sparseTdmSpecJson, worker: { modulePath: workerEntry }, onTiming: (_seed: number, t: { cpuMs: number }) => (workerCpuMs += t.cpuMs) };
        // As the app's queue runs it: with more seeds than cores, the kept seed alone gets the diagnostics.
        const rec = await fitSeeds(sparse, sparseTdmSpec, { seeds, runOne: runSeedInWorker(sparse, o), addDiagnostics: addDiagnosticsInWorker(sparse, o), slots: new CoreSlots(machineCores()) });
        return { s: (performance.now() - t0) / 1000, cpuS: workerCpuMs / 1000, rec };
      };
      const one = await inWorkers([1]);
      figures.push({ name: 'sparse TDM, 120 patients, one seed in a worker (estimation + post-fit)', value: one.s, unit: 's', target: '< 2', note: `wall time, worker start included; job CPU ${one.cpuS.toFixed(2)} s` });
      const three = await inWorkers([1, 2, 3]);
      figures.push({ name: 'sparse TDM, 120 patients, default fit: 3 seeds in parallel workers', value: three.s, unit: 's', target: '< 5', note: `${machineCores()} cores; ${seedsAtOnce(3, machineCores())} seeds at once (main/services/fitSeeds.ts); jobs' CPU ${three.cpuS.toFixed(2)} s; ${three.rec.seeds.verdict}` });
    }
    {
      // Whole processes on Theoph: node start, reading, the fit (default 3 seeds, in workers) and
      // its post-fit steps, writing fit.json; and R with nlme for the same model (R's start,
      // loading nlme, one ML fit), as a user would time both from a shell.
      const dir = mkdtempSync(path.join(tmpdir(), 'plateau-bench-cli-'));
      try {
        writeFileSync(path.join(dir, 'spec.json'), JSON.stringify(theophSpecJson));
        const bin = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '../../main/cli/plateau.js');
        const csv = findRepoFile('resources/validation/reference/theoph/theoph.csv');
        const plateau = (extra: string[]) => median([0, 1, 2].map(() => processMs(process.execPath, [bin, 'fit', '--data', csv, '--model', 'spec.json', '--out', 'fit.json', ...extra], dir)));
        // The bin's two processes (supervisor and command child); the seeds run in job threads of
        // the command child (main/services/seedThreads.ts): the first thread starts before the
        // child loads the fit's modules, and a thread whose seed is done runs the next.
        figures.push({ name: 'whole process: plateau fit on Theoph (default: 3 seeds + post-fit), median of 3', value: plateau([]) / 1000, unit: 's', note: `node start to fit.json written; ${seedsAtOnce(3, machineCores())} job thread(s) for 3 seeds` });
        figures.push({ name: 'whole process: plateau fit on Theoph --seeds 1, median of 3', value: plateau(['--seeds', '1']) / 1000, unit: 's', note: 'one job thread; estimation and post-fit start with cold compiled code' });
        figures.push({ name: 'whole process: plateau --version, median of 3', value: median([0, 1, 2].map(() => processMs(process.execPath, [bin, '--version'], dir))) / 1000, unit: 's', note: 'supervisor and command child start, no command module: the floor under every command' });
        const rscript = ['/usr/bin/Rscript', '/usr/local/bin/Rscript'].find((c) => existsSync(c));
        if (!rscript) figures.push({ name: 'whole process: R nlme on Theoph', value: NaN, unit: 's', note: 'skipped: Rscript not found' });
        else {
          const code = 'suppressMessages(library(nlme)); f <- nlme(conc ~ Dose*exp(lKa)/(exp(lV)*(exp(lKa)-exp(lCl-lV)))*(exp(-exp(lCl-lV)*Time)-exp(-exp(lKa)*Time)), data = Theoph, fixed = lCl + lV + lKa ~ 1, random = pdDiag(lCl + lV + lKa ~ 1), start = c(log(0.04), log(0.5), log(1.5)), method = "ML"); cat(logLik(f))';
          try {
            figures.push({ name: 'whole process: R nlme on Theoph (same model, ML), median of 3', value: median([0, 1, 2].map(() => processMs(rscript, ['-e', code], dir))) / 1000, unit: 's', note: 'Rscript start to result; no SEs by simulation, no diagnostics' });
          } catch (e) {
            figures.push({ name: 'whole process: R nlme on Theoph', value: NaN, unit: 's', note: `skipped: R failed (${(e as Error).message.split('\n')[0]})` });
          }
        }
      } finally {
        rmSync(dir, { recursive: true, force: true });
      }
    }

    let peakRss = process.memoryUsage().rss;
    const perIteration: Record<number, number> = Object.create(null);
    for (const n of [250, 1000, 4000]) {
      const data = tdmDataset(n, 77);
      const model = compileModel(tdmFit, data);
      const t = await timeFit(model, 5);
      peakRss = Math.max(peakRss, process.memoryUsage().rss);
      perIteration[n] = t.ms / t.iterations;
      if (n === 1000) {
        figures.push({ name: '1000 patients, 2-cmt infusion, 12 doses, 2-4 levels, 500 iterations', value: t.ms / 1000, unit: 's', target: '< 10', note: 'combined error, CrCl and weight covariates' });
        figures.push({ name: '1000 patients, CPU time', value: t.cpuMs / 1000, unit: 's' });
      }
      figures.push({ name: `scaling: N = ${n}, time per iteration`, value: t.ms / t.iterations, unit: 'ms' });
    }
    figures.push({ name: 'scaling: (time/iteration per patient) N=4000 vs N=250', value: perIteration[4000] / 4000 / (perIteration[250] / 250), unit: 'ratio', target: '~1 (linear in N)' });
    figures.push({ name: 'peak resident memory', value: peakRss / 2 ** 20, unit: 'MiB' });

    let rscript: string | null = null;
    for (const candidate of ['/usr/bin/Rscript', '/usr/local/bin/Rscript']) if (existsSync(candidate)) rscript = candidate;
    if (!rscript) figures.push({ name: 'nlme on Theoph', value: NaN, unit: 's', note: 'skipped: Rscript not found' });
    else {
      const code = [
        'suppressMessages(library(nlme))',
        't <- system.time(for (k in 1:3) f <- nlme(conc ~ Dose*exp(lKa)/(exp(lV)*(exp(lKa)-exp(lCl-lV)))*(exp(-exp(lCl-lV)*Time)-exp(-exp(lKa)*Time)), data = Theoph, fixed = lCl + lV + lKa ~ 1, random = pdDiag(lCl + lV + lKa ~ 1), start = c(log(0.04), log(0.5), log(1.5)), method = "ML"))',
        'cat(t[["elapsed"]] / 3)',
      ].join('; ');
      try {
        const out = execFileSync(rscript, ['-e', code], { encoding: 'utf8', timeout: 120_000 });
        const nlmeS = Number(out.trim().split(/\s+/).pop());
        figures.push({ name: 'nlme on Theoph (same model, ML), mean of 3', value: nlmeS, unit: 's', note: 'R nlme, in this run' });
        figures.push({ name: 'Theoph: SAEM time / nlme time', value: theophMs / 1000 / nlmeS, unit: 'ratio' });
      } catch (e) {
        figures.push({ name: 'nlme on Theoph', value: NaN, unit: 's', note: `skipped: R failed (${(e as Error).message.split('\n')[0]})` });
      }
    }
    return figures;
  },
};
