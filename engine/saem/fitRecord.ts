/**
 * The fit result record (fit.json): what was fitted (engine version, seed, data hash, spec,
 * settings), the population estimates, the individual estimates, the trajectory with its
 * phase boundary, timing and warnings. Later stages (standard errors, likelihood,
 * diagnostics) add fields to the same record.
 */
import type { DegeneracyReport } from '../posthoc/degeneracy.js';
import { formatDegeneracy } from '../posthoc/degeneracy.js';
import type { ModelSpec } from '../spec/modelSpec.js';
import type { CompiledModel } from '../stats/model.js';
import { getStructuralModel } from '../models/catalogue.js';
import { ENGINE_VERSION } from '../version.js';
import { residualKeyOf, type SaemResult } from './saem.js';
import type { SaemSettings } from './settings.js';

export type PopulationKind = 'typical' | 'bsv' | 'correlation' | 'covariate' | 'residual';

export interface PopulationEstimate {
  /** Parameter name ("CL"); for correlations "CL,V"; for residual terms "a" or "b". */
  parameter: string;
  kind: PopulationKind;
  /** Covariate terms: the covariate, with "=level" for a categorical level. */
  covariate?: string;
  /** typical: natural scale; bsv: SD on the transformed scale; covariate: coefficient on the transformed scale. */
  estimate: number;
  /** Held at its spec value, not estimated. */
  fixed: boolean;
  /** Unit of `estimate` ("L/h", "mg/L", "SD on the log scale", "power exponent"...). */
  unit: string;
  /** What the number is, in words ("power exponent on crcl_mL_min"). */
  meaning: string;
}

export interface FitRecord {
  format: 'plateau-fit';
  engineVersion: string;
  seed: number;
  dataHash: string;
  spec: ModelSpec;
  settings: SaemSettings;
  chainsPerSubject: number;
  nSubjects: number;
  nObservations: number;
  nCensored: number;
  /** Range (min, max) of each numeric covariate in the fitted dataset: the population the fit describes. */
  covariateRanges: Record<string, [number, number]>;
  population: PopulationEstimate[];
  individual: { subject: string; parameters: Record<string, number> }[];
  trajectory: {
    names: string[];
    searchEnd: number;
    searchSettled: boolean;
    iterations: number;
    /** One row per iteration, columns as `names`. */
    values: number[][];
  };
  acceptance: { independent: number | null; randomWalk: number | null; adaptive: number | null; component: Record<string, number | null> };
  timing: { totalMs: number; searchMs: number; averagingMs: number };
  warnings: string[];
  /** Collapse and degeneracy checks (added after the post-fit steps): usableAsPrior false means do not use as a prior. */
  degeneracy?: DegeneracyReport;
}

const finiteOrNull = (x: number): number | null => (Number.isFinite(x) ? x : null);

export function buildFitRecord(
  model: CompiledModel,
  result: SaemResult,
  dataHash: string,
  ranges: Record<string, [number, number]> = Object.create(null),
): FitRecord {
  const nEst = result.estimateNames.length;
  const last = result.estimates;
  const population: PopulationEstimate[] = [];
  let catalogueUnits: Map<string, string>;
  try {
    catalogueUnits = new Map(getStructuralModel(model.spec.structure).parameters.map((q) => [q.name as string, q.unit]));
  } catch {
    catalogueUnits = new Map();
  }
  const scaleOf = (transform: string) => (transform === 'log' ? 'log' : transform === 'logit' ? 'logit' : 'natural');
  let q = 0;
  for (const p of model.parameters) {
    const unit = catalogueUnits.get(p.name) || (p.name === 'F' ? 'fraction' : '');
    population.push({ parameter: p.name, kind: 'typical', estimate: last[q++], fixed: p.fixed, unit, meaning: `typical ${p.name}${unit ? ` (${unit})` : ''}` });
  }
  for (const t of model.covariateTerms) {
    const par = model.parameters[t.parameterIndex];
    const scale = scaleOf(par.transform);
    const covariate = t.level !== undefined ? `${t.covariate}=${t.level}` : t.covariate;
    const meaning =
      t.relation === 'power'
        ? `power exponent on ${t.covariate} (${par.name} x (${t.covariate} / ${t.reference})^exponent)`
        : t.relation === 'linear'
          ? `linear coefficient on ${t.covariate}: change of ${scale}-scale ${par.name} per unit of ${t.covariate} from ${t.reference}`
          : `shift of ${scale}-scale ${par.name} for ${covariate} (reference ${t.reference})`;
    const unit = t.relation === 'power' ? 'power exponent' : t.relation === 'linear' ? `${scale}-scale ${par.name} per unit of ${t.covariate}` : `${scale}-scale ${par.name}`;
    population.push({ parameter: par.name, kind: 'covariate', covariate, estimate: last[q++], fixed: t.fixed, unit, meaning });
  }
  for (let k = 0; k < model.nEta; k++) {
    const par = model.parameters[model.etaParameter[k]];
    const unit = `SD on the ${scaleOf(par.transform)} scale`;
    population.push({ parameter: par.name, kind: 'bsv', estimate: last[q++], fixed: false, unit, meaning: `between-subject variability of ${par.name} (${unit})` });
  }
  for (const b of model.blocks)
    for (let x = 0; x < b.length; x++)
      for (let y = x + 1; y < b.length; y++) {
        const pair = `${model.parameters[model.etaParameter[b[x]]].name},${model.parameters[model.etaParameter[b[y]]].name}`;
        population.push({ parameter: pair, kind: 'correlation', estimate: last[q++], fixed: false, unit: 'correlation', meaning: `correlation of the random effects of ${pair}` });
      }
  const rm = model.residualModel;
  for (; q < nEst; q++) {
    const name = residualKeyOf(result.estimateNames[q]) ?? result.estimateNames[q];
    const isB = name === 'b';
    const unit = isB ? 'fraction of the prediction (SD)' : rm === 'log-additive' ? 'SD on the log scale' : 'mg/L';
    const meaning = isB ? 'proportional residual error' : rm === 'log-additive' ? 'residual error on the log scale' : 'additive residual error';
    population.push({ parameter: name, kind: 'residual', estimate: last[q], fixed: false, unit, meaning });
  }

  const p = model.nParams;
  const individual = model.subjects.map((s, i) => {
    const parameters: Record<string, number> = Object.create(null);
    model.parameters.forEach((par, j) => (parameters[par.name] = result.individualMean[i * p + j]));
    return { subject: s.id, parameters };
  });
  const values: number[][] = [];
  for (let it = 0; it < result.iterations; it++) values.push(Array.from(result.trajectory.subarray(it * nEst, (it + 1) * nEst)));
  const component: Record<string, number | null> = Object.create(null);
  for (let k = 0; k < model.nEta; k++) component[model.parameters[model.etaParameter[k]].name] = finiteOrNull(result.acceptance.component[k]);

  const warnings = [...result.warnings];
  for (const e of population) if (!Number.isFinite(e.estimate)) warnings.push(`estimate ${e.kind} ${e.parameter} is not finite: do not use this fit`);

  return {
    format: 'plateau-fit',
    engineVersion: ENGINE_VERSION,
    seed: result.seed,
    dataHash,
    spec: model.spec,
    settings: result.settings,
    chainsPerSubject: result.chains,
    nSubjects: model.nSubjects,
    nObservations: model.nObsTotal,
    nCensored: model.nCensoredTotal,
    covariateRanges: ranges,
    population,
    individual,
    trajectory: { names: [...result.estimateNames], searchEnd: result.searchEnd, searchSettled: result.searchSettled, iterations: result.iterations, values },
    acceptance: { independent: finiteOrNull(result.acceptance.independent), randomWalk: finiteOrNull(result.acceptance.randomWalk), adaptive: finiteOrNull(result.acceptance.adaptive), component },
    timing: { totalMs: result.timingMs.total, searchMs: result.timingMs.search, averagingMs: result.timingMs.averaging },
    warnings,
  };
}

/** A plain-text summary of a fit for the terminal. */
export function formatFitSummary(record: FitRecord, afterFindings: readonly string[] = []): string {
  const lines: string[] = [...formatDegeneracy(record.degeneracy), ...afterFindings];
  const fmt = (x: number) => (Number.isFinite(x) ? (Math.abs(x) >= 1e4 || (Math.abs(x) < 1e-3 && x !== 0) ? x.toExponential(4) : x.toPrecision(5)) : String(x));
  lines.push(`Plateau fit (engine ${record.engineVersion}, seed ${record.seed})`);
  lines.push(`  ${record.nSubjects} subjects, ${record.nObservations} levels (${record.nCensored} below the LLOQ), ${record.chainsPerSubject} chain(s) per subject`);
  lines.push(`  search ${record.trajectory.searchEnd} iterations${record.trajectory.searchSettled ? ' (settled)' : ' (cap reached)'}, averaging ${record.trajectory.iterations - record.trajectory.searchEnd}; ${(record.timing.totalMs / 1000).toFixed(2)} s`);
  lines.push('');
  for (const e of record.population) {
    let label: string;
    let extra = '';
    if (e.kind === 'typical') label = `${e.parameter} (typical)`;
    else if (e.kind === 'bsv') {
      label = `BSV ${e.parameter} (omega)`;
      const transform = record.spec.parameters[e.parameter as keyof ModelSpec['parameters']]?.transform;
      if (transform === 'log') extra = `  CV ${(100 * Math.sqrt(Math.expm1(e.estimate * e.estimate))).toFixed(1)}%`;
    } else if (e.kind === 'correlation') label = `correlation ${e.parameter}`;
    else if (e.kind === 'covariate') label = `${e.parameter} ~ ${e.covariate}`;
    else label = e.parameter === 'b' ? 'residual: proportional b' : record.spec.residual.model === 'log-additive' ? 'residual: log-scale SD a' : 'residual: additive a';
    const unit = e.kind === 'typical' || e.kind === 'residual' || e.kind === 'covariate' ? e.unit : e.kind === 'bsv' ? e.unit : '';
    lines.push(`  ${label.padEnd(28)} ${fmt(e.estimate).padStart(12)} ${unit}${e.fixed ? '  (fixed)' : ''}${extra}`);
  }
  if (record.warnings.length) {
    lines.push('');
    lines.push('Warnings:');
    for (const w of record.warnings) lines.push(`  - ${w}`);
  }
  return lines.join('\n');
}
