/**
 * Benchmark of the post-fit steps (engine/posthoc): time of each step on Theoph (R
 * datasets::Theoph, 12 subjects) and on a 1000-patient sparse TDM dataset simulated from a
 * 2-compartment infusion model (invented data: 2-4 levels and 12 doses per patient, weight and
 * creatinine-clearance covariates), each after its SAEM fit. Figures only.
 * Targets (issue 4): Theoph fit + SE + likelihood with 10,000 importance samples per subject
 * < 1 s; 1000 patients, fit and every post-fit step, < 15 s.
 */
import { runPosthoc, type PosthocResult } from '../../engine/posthoc/index.js';
import { runSaem } from '../../engine/saem/saem.js';
import { compileModel } from '../../engine/stats/model.js';
import { tdmDataset, tdmFit, theophDataset, theophSpec } from './workloads.js';

interface Figure { name: string; value: number; unit: string; target?: string; note?: string }

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
    const theoph = compileModel(theophSpec, theophDataset());
    // Warm-up runs (a fit, as the estimator's bench does, and the post-fit steps) so the figures are not the JIT's.
    await runSaem(theoph, { seed: 2 });
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
    const data = tdmDataset(1000, 2);
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
