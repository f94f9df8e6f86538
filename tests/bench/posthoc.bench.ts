/**
 * Benchmark of the post-fit steps (engine/posthoc): time of each step on Theoph (R
 * datasets::Theoph, 12 subjects) and on a 1000-patient sparse TDM dataset simulated from a
 * 2-compartment infusion model (invented data: 2-4 levels and 12 doses per patient, weight and
 * creatinine-clearance covariates), each after its SAEM fit. Figures only.
 * Targets (issue 4): Theoph fit + SE + likelihood with 10,000 importance samples per subject
 * < 1 s; 1000 patients, fit and every post-fit step, < 15 s.
 */
import { readFileSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { parseCanonicalCsv } from '../../engine/data/canonicalCsv.js';
import { createDataset, type SubjectInput } from '../../engine/data/dataset.js';
import type { Dose } from '../../engine/data/types.js';
import { runPosthoc, type PosthocResult } from '../../engine/posthoc/index.js';
import { simulateDataset } from '../../engine/posthoc/simulateData.js';
import { createStreams } from '../../engine/rng/index.js';
import { runSaem } from '../../engine/saem/saem.js';
import { parseModelSpec, type ModelSpec } from '../../engine/spec/modelSpec.js';
import { compileModel } from '../../engine/stats/model.js';

interface Figure { name: string; value: number; unit: string; target?: string; note?: string }

const theophSpec = parseModelSpec({
  structure: '1cmt',
  parameters: { CL: { typical: 0.05, bsv: 0.3 }, V: { typical: 0.5, bsv: 0.3 }, ka: { typical: 1.5, bsv: 0.3 } },
  residual: { model: 'additive', a: 1 },
});

/**
 * Invented TDM design as in the estimator's bench (tests/bench/saem.bench.ts, whose generator is
 * not exported): 12 one-hour infusions q12h, 2-4 levels at peaks, mid-interval or troughs,
 * weight and CrCl. The levels are simulated from `tdmTruth` by engine/posthoc/simulateData.ts.
 */
export function sparseTdmTemplate(n: number, seed: number) {
  const rng = createStreams(seed).stream('bench', 'tdm-design');
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
      id: `P${i + 1}`,
      covariates: { weight_kg: Math.round(45 + 65 * rng.uniform()), crcl_mL_min: Math.round(20 + 120 * rng.uniform()) },
      doses,
      observations: [...times].sort((a, b) => a - b).map((t) => ({ timeH: t, valueMgL: 1, censored: false })),
    });
  }
  return createDataset(inputs, ['weight_kg', 'crcl_mL_min']);
}

const tdmTruth: ModelSpec = parseModelSpec({
  structure: '2cmt',
  parameters: { CL: { typical: 4, bsv: 0.3 }, V1: { typical: 30, bsv: 0.25 }, Q: { typical: 6, bsv: null, fixed: true }, V2: { typical: 40, bsv: null, fixed: true } },
  covariates: [
    { parameter: 'CL', covariate: 'crcl_mL_min', relation: 'power', reference: 80, coefficient: 0.7 },
    { parameter: 'V1', covariate: 'weight_kg', relation: 'power', reference: 70, coefficient: 1, fixed: true },
  ],
  residual: { model: 'combined', a: 0.5, b: 0.1 },
});
/** The fit's spec: starting values away from the truth, phases as in the estimator's bench. */
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

function stepFigures(label: string, r: PosthocResult, samples: number): Figure[] {
  const t = r.timingMs;
  return [
    { name: `${label}: conditional modes`, value: t.modes, unit: 'ms' },
    { name: `${label}: conditional distributions (MCMC)`, value: t.conditional, unit: 'ms', note: `median ${median(r.conditional.iterations)} iterations per subject` },
    { name: `${label}: SE, Louis' formula`, value: t.standardErrors, unit: 'ms' },
    { name: `${label}: SE, linearisation`, value: t.standardErrorsLinearised, unit: 'ms' },
    { name: `${label}: -2LL, importance sampling`, value: t.likelihood, unit: 'ms', note: `${samples} samples per subject (mean); -2LL ${r.likelihood.importance!.minus2LL.toFixed(2)} +- ${r.likelihood.importance!.mcError.toFixed(3)}` },
    { name: `${label}: diagnostics (NPDE, VPC)`, value: t.diagnostics, unit: 'ms', note: `${r.diagnostics?.npde.replicates ?? 0} replicates` },
  ];
}

function median(x: Int32Array): number {
  const s = Array.from(x).sort((a, b) => a - b);
  return s[s.length >> 1];
}

export const suite = {
  name: 'posthoc',
  run: async (): Promise<Figure[]> => {
    const figures: Figure[] = [];
    const now = () => performance.now();
    // Theoph.
    const csv = readFileSync(fileURLToPath(new URL('../../../tests/reference/theoph/theoph.csv', import.meta.url)), 'utf8');
    const theoph = compileModel(theophSpec, parseCanonicalCsv(csv));
    // Warm-up run so the figures are not the JIT's.
    runPosthoc(theoph, theoph.initial, { seed: 1, importance: { samplesPerSubject: 1000 }, diagnostics: { replicates: 100 } });
    const cpuMs = () => {
      const u = process.cpuUsage();
      return (u.user + u.system) / 1000;
    };
    let c0 = cpuMs();
    let t0 = now();
    const fit = await runSaem(theoph, { seed: 1 });
    const fitMs = now() - t0;
    const fitCpu = cpuMs() - c0;
    c0 = cpuMs();
    const r = runPosthoc(theoph, fit.theta, { seed: 1, startPhi: fit.individualPhiMean, now, importance: { samplesPerSubject: 10_000, targetMcError: null } });
    const postCpu = cpuMs() - c0;
    figures.push({ name: 'Theoph: SAEM fit', value: fitMs, unit: 'ms' });
    figures.push(...stepFigures('Theoph', r, 10_000));
    const core = fitMs + r.timingMs.modes + r.timingMs.conditional + r.timingMs.standardErrors + r.timingMs.likelihood;
    figures.push({ name: 'Theoph: fit + SE + likelihood', value: core / 1000, unit: 's', target: '< 1', note: 'fit, modes, conditional MCMC, Louis SE, IS 10,000 per subject' });
    figures.push({ name: 'Theoph: fit + every post-fit step', value: (fitMs + r.timingMs.total) / 1000, unit: 's' });
    figures.push({ name: 'Theoph: CPU time, fit / post-fit steps', value: fitCpu / 1000, unit: 's', note: `post-fit ${(postCpu / 1000).toFixed(3)} s CPU (wall figures move with the machine's load)` });

    // 1000 sparse TDM patients (simulated, invented data).
    const data = simulateDataset(tdmTruth, sparseTdmTemplate(1000, 2), { seed: 3 });
    const model = compileModel(tdmFit, data);
    c0 = cpuMs();
    t0 = now();
    const fit2 = await runSaem(model, { seed: 1 });
    const fit2Ms = now() - t0;
    const fit2Cpu = cpuMs() - c0;
    c0 = cpuMs();
    const r2 = runPosthoc(model, fit2.theta, { seed: 1, startPhi: fit2.individualPhiMean, now });
    const post2Cpu = cpuMs() - c0;
    const samples = Math.round(r2.likelihood.importance!.samplesUsed.reduce((a, b) => a + b, 0) / 1000);
    figures.push({ name: '1000 TDM patients: SAEM fit', value: fit2Ms, unit: 'ms', note: `${fit2.iterations} iterations` });
    figures.push(...stepFigures('1000 TDM patients', r2, samples));
    figures.push({ name: '1000 TDM patients: fit + every post-fit step', value: (fit2Ms + r2.timingMs.total) / 1000, unit: 's', target: '< 15' });
    figures.push({ name: '1000 TDM patients: post-fit steps only', value: r2.timingMs.total / 1000, unit: 's' });
    figures.push({ name: '1000 TDM patients: CPU time, fit / post-fit steps', value: fit2Cpu / 1000, unit: 's', note: `post-fit ${(post2Cpu / 1000).toFixed(2)} s CPU` });
    return figures;
  },
};
