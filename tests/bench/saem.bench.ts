/**
 * SAEM benchmarks: Theoph fit (default settings), a 1000-patient sparse two-compartment
 * infusion TDM dataset (invented, simulated) for 500 iterations, scaling over N, peak memory,
 * and nlme on Theoph timed in the same run when Rscript is present.
 */
import { execFileSync } from 'node:child_process';
import { existsSync, readFileSync } from 'node:fs';
import * as path from 'node:path';
import { fileURLToPath } from 'node:url';
import { parseCanonicalCsv } from '../../engine/data/canonicalCsv.js';
import { createDataset, type SubjectInput } from '../../engine/data/dataset.js';
import type { Dataset, Dose } from '../../engine/data/types.js';
import { createStreams } from '../../engine/rng/index.js';
import { runSaem } from '../../engine/saem/saem.js';
import { parseModelSpec, type ModelSpec } from '../../engine/spec/modelSpec.js';
import { compileModel } from '../../engine/stats/model.js';
import { residualSd } from '../../engine/stats/residual.js';
import type { BenchFigure } from './run.js';

const here = path.dirname(fileURLToPath(import.meta.url));
function findRepoFile(rel: string): string {
  for (const up of ['..', '../..', '../../..']) {
    const p = path.resolve(here, up, rel);
    if (existsSync(p)) return p;
  }
  throw new Error(`cannot find ${rel}`);
}

const theophSpec = parseModelSpec({
  structure: '1cmt',
  parameters: { CL: { typical: 0.05, bsv: 0.3 }, V: { typical: 0.5, bsv: 0.3 }, ka: { typical: 1.5, bsv: 0.3 } },
  residual: { model: 'additive', a: 1 },
});

const tdmTruth = parseModelSpec({
  structure: '2cmt',
  parameters: { CL: { typical: 4, bsv: 0.3 }, V1: { typical: 30, bsv: 0.25 }, Q: { typical: 6, bsv: null }, V2: { typical: 40, bsv: null } },
  covariates: [
    { parameter: 'CL', covariate: 'crcl_mL_min', relation: 'power', reference: 80, coefficient: 0.7 },
    { parameter: 'V1', covariate: 'weight_kg', relation: 'power', reference: 70, coefficient: 1, fixed: true },
  ],
  residual: { model: 'combined', a: 0.5, b: 0.1 },
});
const tdmFit: ModelSpec = parseModelSpec({
  structure: '2cmt',
  parameters: { CL: { typical: 3, bsv: 0.5 }, V1: { typical: 20, bsv: 0.5 }, Q: { typical: 6, bsv: null, fixed: true }, V2: { typical: 40, bsv: null, fixed: true } },
  covariates: [
    { parameter: 'CL', covariate: 'crcl_mL_min', relation: 'power', reference: 80, coefficient: 0.5 },
    { parameter: 'V1', covariate: 'weight_kg', relation: 'power', reference: 70, coefficient: 1, fixed: true },
  ],
  residual: { model: 'combined', a: 1, b: 0.2 },
  estimation: { explorationMinIterations: 300, explorationMaxIterations: 300, autoEndExploration: false, averagingIterations: 200 },
});

/** Invented TDM dataset: 12 one-hour infusions q12h, 2-4 levels, weight and CrCl. */
function tdmDataset(n: number, seed: number): Dataset {
  const rng = createStreams(seed).stream('bench-design');
  const inputs: SubjectInput[] = [];
  for (let i = 0; i < n; i++) {
    const doses: Dose[] = Array.from({ length: 12 }, (_, k) => ({ timeH: 12 * k, amountMg: 1000, route: 'infusion' as const, durationH: 1 }));
    const nLevels = 2 + rng.int(3);
    const times = new Set<number>();
    while (times.size < nLevels) {
      const d = 2 + rng.int(10);
      const kind = rng.int(3);
      times.add(Math.round((12 * d + (kind === 0 ? 1.5 + rng.uniform() : kind === 1 ? 5 + 3 * rng.uniform() : 11.5 + 0.4 * rng.uniform())) * 100) / 100);
    }
    inputs.push({
      id: `B${i + 1}`,
      covariates: { weight_kg: Math.round(45 + 65 * rng.uniform()), crcl_mL_min: Math.round(20 + 120 * rng.uniform()) },
      doses,
      observations: [...times].sort((a, b) => a - b).map((t) => ({ timeH: t, valueMgL: 1, censored: false })),
    });
  }
  const placeholder = createDataset(inputs);
  const model = compileModel(tdmTruth, placeholder);
  const phi = new Float64Array(model.nParams);
  const sim = createStreams(seed + 1);
  return createDataset(
    placeholder.subjects.map((s, i) => {
      const r = sim.stream('subject', i);
      model.meanPhi(i, model.initial, phi);
      for (let k = 0; k < model.nEta; k++) phi[model.etaParameter[k]] += Math.sqrt(model.initial.omega[k * model.nEta + k]) * r.normal();
      const f = new Float64Array(s.observations.length);
      model.predict(i, phi, f);
      return {
        id: s.id,
        covariates: { ...s.covariates },
        doses: [...s.doses],
        observations: s.observations.map((o, k) => ({ timeH: o.timeH, valueMgL: Math.max(0.05, f[k] + residualSd('combined', 0.5, 0.1, f[k]) * r.normal()), censored: false })),
      };
    }),
  );
}

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
    const theoph = parseCanonicalCsv(readFileSync(findRepoFile('tests/reference/theoph/theoph.csv'), 'utf8'));
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
