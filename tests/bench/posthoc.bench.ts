/**
 * Benchmark of the post-fit steps (engine/posthoc): time of each step on Theoph (R
 * datasets::Theoph, 12 subjects) and on a 1000-patient sparse TDM dataset simulated from a
 * 2-compartment infusion model (invented data: 2-4 levels and 10-14 doses per patient, weight
 * and creatinine-clearance covariates), each after its SAEM fit. Figures only.
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

/** Invented TDM design: q12h 1 h infusions, levels at troughs and peaks of the last intervals. */
export function sparseTdmTemplate(n: number, seed: number) {
  const rng = createStreams(seed).stream('bench', 'tdm-design');
  const inputs: SubjectInput[] = [];
  for (let i = 0; i < n; i++) {
    const nDoses = 10 + rng.int(5);
    const doses: Dose[] = Array.from({ length: nDoses }, (_, k) => ({ timeH: 12 * k, amountMg: 1000, route: 'infusion' as const, durationH: 1 }));
    const nLevels = 2 + rng.int(3);
    const times: number[] = [];
    for (let l = 0; l < nLevels; l++) {
      const interval = nDoses - 1 - (l >> 1);
      times.push(12 * interval + (l % 2 === 0 ? 11.5 : 1.5 + 2 * rng.uniform()));
    }
    times.sort((a, b) => a - b);
    inputs.push({
      id: `P${i + 1}`,
      covariates: { weight_kg: Math.round(50 + 50 * rng.uniform()), crcl_mL_min: Math.round(30 + 90 * rng.uniform()) },
      doses,
      observations: times.map((t) => ({ timeH: t, valueMgL: 1, censored: false })),
    });
  }
  return createDataset(inputs, ['weight_kg', 'crcl_mL_min']);
}

export const tdmSpec: ModelSpec = parseModelSpec({
  structure: '2cmt',
  parameters: { CL: { typical: 4, bsv: 0.3 }, V1: { typical: 30, bsv: 0.25 }, Q: { typical: 5, bsv: null, fixed: true }, V2: { typical: 40, bsv: null, fixed: true } },
  covariates: [
    { parameter: 'CL', covariate: 'crcl_mL_min', relation: 'power', reference: 80, coefficient: 0.75 },
    { parameter: 'V1', covariate: 'weight_kg', relation: 'power', reference: 70, coefficient: 1 },
  ],
  residual: { model: 'proportional', b: 0.15 },
});

function stepFigures(label: string, r: PosthocResult, samples: number): Figure[] {
  const t = r.timingMs;
  return [
    { name: `${label}: conditional modes`, value: t.modes, unit: 'ms' },
    { name: `${label}: conditional distributions (MCMC)`, value: t.conditional, unit: 'ms', note: `median ${median(r.conditional.iterations)} iterations per subject` },
    { name: `${label}: SE, Louis' formula`, value: t.standardErrors, unit: 'ms' },
    { name: `${label}: SE, linearisation`, value: t.standardErrorsLinearised, unit: 'ms' },
    { name: `${label}: -2LL, importance sampling`, value: t.likelihood, unit: 'ms', note: `${samples} samples per subject; -2LL ${r.likelihood.importance!.minus2LL.toFixed(2)} +- ${r.likelihood.importance!.mcError.toFixed(3)}` },
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
    let t0 = now();
    const fit = await runSaem(theoph, { seed: 1 });
    const fitMs = now() - t0;
    const r = runPosthoc(theoph, fit.theta, { seed: 1, startPhi: fit.individualPhiMean, now });
    figures.push({ name: 'Theoph: SAEM fit', value: fitMs, unit: 'ms' });
    figures.push(...stepFigures('Theoph', r, 10_000));
    const core = fitMs + r.timingMs.modes + r.timingMs.conditional + r.timingMs.standardErrors + r.timingMs.likelihood;
    figures.push({ name: 'Theoph: fit + SE + likelihood', value: core / 1000, unit: 's', target: '< 1', note: 'fit, modes, conditional MCMC, Louis SE, IS 10,000 per subject' });
    figures.push({ name: 'Theoph: fit + every post-fit step', value: (fitMs + r.timingMs.total) / 1000, unit: 's' });

    // 1000 sparse TDM patients (simulated, invented data).
    const data = simulateDataset(tdmSpec, sparseTdmTemplate(1000, 2), { seed: 3 });
    const model = compileModel(tdmSpec, data);
    t0 = now();
    const fit2 = await runSaem(model, { seed: 1 });
    const fit2Ms = now() - t0;
    const samples = 1000;
    const r2 = runPosthoc(model, fit2.theta, { seed: 1, startPhi: fit2.individualPhiMean, now, importance: { samplesPerSubject: samples } });
    figures.push({ name: '1000 TDM patients: SAEM fit', value: fit2Ms, unit: 'ms', note: `${fit2.iterations} iterations` });
    figures.push(...stepFigures('1000 TDM patients', r2, samples));
    figures.push({ name: '1000 TDM patients: fit + every post-fit step', value: (fit2Ms + r2.timingMs.total) / 1000, unit: 's', target: '< 15' });
    figures.push({ name: '1000 TDM patients: post-fit steps only', value: r2.timingMs.total / 1000, unit: 's' });
    return figures;
  },
};
