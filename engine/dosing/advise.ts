/**
 * Dose advice for one patient, end to end: the patient's prior from the population model, the
 * posterior (MAP and draws), the forecast, the regimen table and the warnings. One entry point
 * for the CLI, the worker and the UI. Same inputs and seed give the same advice.
 */
import type { CovariateValue, Dose } from '../data/types.js';
import { structuralModelWithSolver } from '../models/catalogue.js';
import type { StructuralModel } from '../models/types.js';
import { createStreams } from '../rng/index.js';
import { forecast, type Forecast } from './forecast.js';
import { buildSteadyStateEvaluator, type Regimen } from './metrics.js';
import { fmtH, patientCovariate, type Patient } from './patient.js';
import type { ModelProvenance, PopulationModel } from './population.js';
import { buildLevelObjective, drawPrior, findMap, postFitDraws, samplePosterior, DEFAULT_SAMPLER, type SamplerDiagnostics } from './posterior.js';
import { buildPatientPrior, type PatientPrior } from './prior.js';
import { DEFAULT_REGIMEN_SETTINGS, evaluateRegimens, explainRegimen, formatRegimen, goalCentreOf, rankRegimens, regimenGrid, type RegimenResult } from './regimens.js';
import { bandOf, sig } from './summary.js';
import type { RegimenSettings, TargetSpec } from './targets.js';
import {
  checkCovariateRanges,
  checkLevelTiming,
  checkPosteriorWidth,
  checkPredictive,
  checkRenalChange,
  checkSampler,
  fromPatientNotes,
  type AdviceWarning,
} from './warnings.js';

export interface AdviceOptions {
  population: PopulationModel;
  patient: Patient;
  /** Without a target no ranking: the current regimen (or --evaluate) is reported with its metrics. */
  target?: TargetSpec;
  /** The caution text (resources/cautions); required, always carried in the advice. */
  caution: string;
  seed: number;
  engineVersion: string;
  /** Evaluate this regimen only (it becomes the only entry of `regimens`). */
  evaluate?: Regimen;
  nDraws?: number;
  regimenSettings?: RegimenSettings;
  /** Suggest a loading dose with every candidate. */
  loadingDose?: boolean;
  /** Regimens explained in words. */
  explainTop?: number;
  /** Report the time to fall below this level after the last dose. */
  belowMgL?: number;
  /** Give the regimen table even when a check blocks the advice (it stays marked as blocked). */
  overrideBlocks?: boolean;
  /** Structural model override (tests); default the catalogue's. */
  structuralModel?: StructuralModel;
}

export interface ParameterSummary {
  map: Record<string, number>;
  mean: Record<string, number>;
  sd: Record<string, number>;
  q05: Record<string, number>;
  q95: Record<string, number>;
  /** Population typical value for this patient's covariates. */
  typical: Record<string, number>;
}

export interface Advice {
  status: 'advice' | 'blocked' | 'blocked-shown-on-request';
  caution: string;
  patient: { id: string; covariates: Record<string, CovariateValue>; derived: Record<string, string>; nDoses: number; nLevels: number; clockOrigin?: string; nextDoseH: number; nextDoseAssumed: boolean };
  model: ModelProvenance & { structure: string; covariatesUsed: Record<string, string> };
  target: TargetSpec;
  posterior: ParameterSummary & { nDraws: number; diagnostics: SamplerDiagnostics; mapObjective: number; levels: Array<{ timeH: number; concMgL: number; censored: boolean; predictedMap: number; priorPredictiveP: number; posteriorPredictiveP: number; iwres: number | null }> };
  regimens: RegimenResult[];
  /** Number of candidates evaluated (before ranking). */
  candidatesEvaluated: number;
  forecast: Forecast | null;
  warnings: AdviceWarning[];
  seed: number;
  engineVersion: string;
}

export class AdviceError extends Error {
  constructor(message: string) {
    super(message);
    this.name = 'AdviceError';
  }
}

/** Next dose: as given, else one usual interval after the last dose (inferred), else 12 h after it. */
function nextDoseTime(patient: Patient): { h: number; assumed: boolean; note?: string } {
  if (patient.nextDoseH !== undefined) return { h: patient.nextDoseH, assumed: false };
  const d = patient.doses;
  const last = d[d.length - 1];
  if (d.length >= 2) {
    const tau = last.timeH - d[d.length - 2].timeH;
    return { h: last.timeH + tau, assumed: true, note: `next dose assumed at ${fmtH(last.timeH + tau)} (one interval of ${fmtH(tau)} after the last dose); give next_dose_h to set it` };
  }
  const h = last.timeH + (last.steadyStateIntervalH ?? 12);
  return { h, assumed: true, note: `next dose assumed at ${fmtH(h)}; give next_dose_h to set it` };
}

/** The interval between the last two doses (or of a steady-state first dose). */
function currentTauOf(patient: Patient): number | undefined {
  const d = patient.doses;
  return d.length >= 2 ? d[d.length - 1].timeH - d[d.length - 2].timeH : d[0].steadyStateIntervalH;
}

const NONLINEAR_TABLE_DRAWS = 500;

/** n evenly spaced rows of a rows x cols matrix. */
function thinRows(m: Float64Array, cols: number, rows: number, n: number): Float64Array {
  const out = new Float64Array(n * cols);
  for (let k = 0; k < n; k++) out.set(m.subarray(Math.floor((k * rows) / n) * cols, (Math.floor((k * rows) / n) + 1) * cols), k * cols);
  return out;
}

const NO_TARGET: TargetSpec = { id: 'none', label: 'no target', source: 'none', sourceStatus: 'from memory', localProtocol: 'check local protocol', goals: [], toxic: [] };

function roundTo(x: number, step: number): number {
  return Math.round(x / step) * step;
}

export function adviseDose(o: AdviceOptions): Advice {
  if (!o.caution || !o.caution.trim()) throw new AdviceError('the caution text is missing: dose advice is never given without it');
  const { population, patient } = o;
  const target: TargetSpec = o.target ?? NO_TARGET;
  const model = o.structuralModel ?? structuralModelWithSolver(population.spec.structure, population.spec.solver);
  const warnings: AdviceWarning[] = [];
  for (const w of population.warnings) warnings.push({ severity: 'flag', code: 'model-provenance', message: w });
  for (const c of population.checks ?? []) warnings.push({ severity: c.severity, code: c.code, message: c.message });
  const prov = `${population.provenance.name ?? ''} ${population.provenance.source ?? ''}`;
  if (/not for clinical use/i.test(prov)) warnings.push({ severity: 'block', code: 'example-model', message: 'the model is labelled "example, not for clinical use": its values are invented' });
  warnings.push(...fromPatientNotes(patient.notes));

  const hasKa = 'ka' in population.spec.parameters;
  const nOral = patient.doses.filter((d) => d.route === 'oral').length;
  if (nOral > 0 && !hasKa)
    throw new AdviceError(`the patient has ${nOral} oral dose(s) but the model "${population.provenance.name ?? population.spec.structure}" has no absorption rate ka (an IV model): it cannot describe oral doses; use a model with oral absorption, or check the dose routes in the patient file`);
  if (nOral === 0 && hasKa) {
    const unused = ['ka', 'F', 'tlag'].filter((k) => k in population.spec.parameters);
    warnings.push({ severity: 'note', code: 'absorption-unused', message: `${unused.join(', ')} unused for IV doses: the model's absorption parameters do not apply to this patient's doses (all IV); its IV part (clearance, volumes) is used` });
  }
  // Model covariates, resolved against the patient's names.
  const covValues = new Map<string, CovariateValue>();
  const covariatesUsed: Record<string, string> = Object.create(null);
  const modelCovNames = new Set<string>([...population.spec.covariates.map((c) => c.covariate)]);
  for (const name of modelCovNames) {
    const v = patientCovariate(patient, name);
    if (v) {
      covValues.set(name, v.value);
      covariatesUsed[name] = v.from === name ? name : `${v.from} (as ${name})`;
    }
  }
  for (const name of Object.keys(population.covariateRanges ?? {})) {
    if (covValues.has(name)) continue;
    const v = patientCovariate(patient, name);
    if (v) covValues.set(name, v.value);
  }
  const usedFrom = new Set([...Object.values(covariatesUsed)].map((x) => x.split(' ')[0]));
  // The inputs of a derived creatinine clearance are used through it.
  if (usedFrom.has('crcl_mL_min') && 'crcl_mL_min' in patient.derived && patient.derived.crcl_mL_min.includes('Cockcroft')) for (const k of ['age_y', 'sex', 'scr_mg_dL', 'weight_kg']) usedFrom.add(k);
  const unused = Object.keys(patient.covariates).filter((k) => !usedFrom.has(k));
  if (unused.length) warnings.push({ severity: 'note', code: 'covariate-unused', message: `covariates not used by the model: ${unused.join(', ')}` });
  const prior: PatientPrior = buildPatientPrior(population, covValues, model);
  warnings.push(...checkCovariateRanges(covValues, population.covariateRanges));

  // Posterior.
  const root = createStreams(o.seed);
  const nDrawsWanted = o.nDraws ?? DEFAULT_SAMPLER.nDraws;
  const obj = buildLevelObjective(prior, patient.doses, patient.levels);
  const map = findMap(obj, prior);
  // A subject of the site fit with no level the fit did not see: its post-fit draws are the posterior.
  const postFit = postFitDraws(population, patient.id, patient.levels, prior);
  const draws = postFit ?? (obj.nLevels === 0 ? drawPrior(prior, root.stream('dosing', 'prior-draws'), nDrawsWanted) : samplePosterior(obj, prior, map, root.stream('dosing', 'posterior'), { nDraws: nDrawsWanted }));
  const posteriorFrom = postFit ? `post-fit draws of subject ${patient.id} of the site fit (${postFit.nDraws} draws)` : undefined;
  if (postFit) warnings.push({ severity: 'note', code: 'post-fit-draws', message: `the patient is subject ${patient.id} of the site fit and brings no level the fit did not see: the posterior is that subject's ${postFit.nDraws} post-fit draws from the fit, not a new sampler run` });
  const nDraws = draws.nDraws;
  warnings.push(...checkLevelTiming(patient.doses, patient.levels, prior.nEta, patient.levelKinds));
  if (obj.nLevels > 0) warnings.push(...checkSampler(map, draws.diagnostics, prior.etaNames));
  const ppc = checkPredictive(prior, obj, map, root.stream('dosing', 'predictive-check'), draws.eta, obj.nLevels > 0 ? nDraws : 0);
  warnings.push(...ppc.warnings);
  warnings.push(...checkRenalChange(patient.renal));
  const scr = patient.covariates.scr_mg_dL;
  const latest = patient.renal.length ? patient.renal[patient.renal.length - 1] : undefined;
  if (typeof scr === 'number' && latest && Math.abs(latest.scrMgDl / scr - 1) > 0.2)
    warnings.push({ severity: 'flag', code: 'scr-stale', message: `the covariate serum creatinine (${scr.toFixed(2)} mg/dL) differs from the latest one in the renal history (${latest.scrMgDl.toFixed(2)} mg/dL at ${latest.timeH} h): the model uses the covariate value; update it if the latest reflects the patient now` });

  // Parameter draws on the natural scale.
  const nP = model.parameterOrder.length;
  const paramDraws = new Float64Array(nDraws * nP);
  const row = new Float64Array(nP);
  const etaRow = new Float64Array(prior.nEta);
  let failed = 0;
  for (let k = 0; k < nDraws; k++) {
    for (let i = 0; i < prior.nEta; i++) etaRow[i] = draws.eta[k * prior.nEta + i];
    if (!prior.toModelVector(etaRow, row)) {
      row.fill(NaN);
      failed++;
    }
    paramDraws.set(row, k * nP);
  }
  const summary: ParameterSummary = { map: Object.create(null), mean: Object.create(null), sd: Object.create(null), q05: Object.create(null), q95: Object.create(null), typical: Object.create(null) };
  const mapVector = new Float64Array(nP);
  prior.toModelVector(map.eta, mapVector);
  const col = new Float64Array(nDraws);
  const scratch = new Float64Array(nDraws);
  for (const p of prior.parameters) {
    for (let k = 0; k < nDraws; k++) col[k] = paramDraws[k * nP + p.modelIndex];
    let n = 0;
    let s = 0;
    let s2 = 0;
    for (let k = 0; k < nDraws; k++) if (Number.isFinite(col[k])) {
      n++;
      s += col[k];
    }
    const mean = s / n;
    for (let k = 0; k < nDraws; k++) if (Number.isFinite(col[k])) s2 += (col[k] - mean) ** 2;
    let n2 = 0;
    for (let k = 0; k < nDraws; k++) if (Number.isFinite(col[k])) scratch[n2++] = col[k];
    const sorted = scratch.subarray(0, n2).sort();
    const q = (pr: number) => {
      const h = (n2 - 1) * pr;
      const lo = Math.floor(h);
      return sorted[lo] + (h - lo) * (sorted[Math.min(n2 - 1, lo + 1)] - sorted[lo]);
    };
    summary.map[p.name] = sig(mapVector[p.modelIndex], 6);
    summary.mean[p.name] = sig(mean, 6);
    summary.sd[p.name] = sig(Math.sqrt(s2 / Math.max(1, n - 1)), 6);
    summary.q05[p.name] = sig(q(0.05), 6);
    summary.q95[p.name] = sig(q(0.95), 6);
    summary.typical[p.name] = sig(prior.typical[p.name], 6);
    if (p.etaIndex >= 0) {
      let e2 = 0;
      let em = 0;
      for (let k = 0; k < nDraws; k++) em += draws.eta[k * prior.nEta + p.etaIndex];
      em /= nDraws;
      for (let k = 0; k < nDraws; k++) e2 += (draws.eta[k * prior.nEta + p.etaIndex] - em) ** 2;
      const postSd = Math.sqrt(e2 / Math.max(1, nDraws - 1));
      warnings.push(...checkPosteriorWidth(p.name, q(0.05), q(0.95), Math.sqrt(prior.omega[p.etaIndex * (prior.nEta + 1)]), postSd, obj.nLevels));
    }
  }
  if (failed > 0) warnings.push({ severity: 'flag', code: 'draws-failed', message: `${failed} of ${nDraws} draws gave parameters outside the model's domain and were left out` });

  // Regimens.
  const next = nextDoseTime(patient);
  if (next.note) warnings.push({ severity: 'note', code: 'next-dose-assumed', message: next.note });
  const settings = o.regimenSettings ?? target.regimen ?? DEFAULT_REGIMEN_SETTINGS;
  const lastRoute = patient.doses[patient.doses.length - 1].route;
  const route = lastRoute === 'oral' ? 'oral' : 'infusion';
  const last = patient.doses[patient.doses.length - 1];
  const continuation: Regimen | undefined = o.target ? undefined : { doseMg: last.amountMg, intervalH: currentTauOf(patient) ?? 12, durationH: last.durationH, route: last.route };
  const single = o.evaluate ?? continuation;
  const candidates = single ? [single] : regimenGrid(settings, route);
  // The ODE-solved models cost far more per draw: their regimen table uses evenly spaced draws.
  const tableDraws = model.analytic ? nDraws : Math.min(nDraws, NONLINEAR_TABLE_DRAWS);
  const tableParams = tableDraws === nDraws ? paramDraws : thinRows(paramDraws, nP, nDraws, tableDraws);
  if (tableDraws < nDraws) warnings.push({ severity: 'note', code: 'table-draws', message: `the model is solved numerically: regimen probabilities use ${tableDraws} of the ${nDraws} draws (Monte Carlo error up to about ${Math.round(50 / Math.sqrt(tableDraws))} percentage points)` });
  if (candidates.length === 0)
    warnings.push({ severity: 'block', code: 'no-candidates', message: 'no candidate regimen fits the dose range, interval list, durations and rate limit of the regimen settings: widen them' });
  const evalInput = { model, draws: tableParams, nDraws: tableDraws, target };
  let results = evaluateRegimens(evalInput, candidates);
  if (o.loadingDose && !single) results = results.map((r) => ({ ...r, loadingDoseMg: loadingDoseFor(model, r, mapVector, settings) }));
  const preferIntervalH = currentTauOf(patient) ?? target.preferIntervalH;
  const centre = goalCentreOf(target);
  const ranked = single ? results : rankRegimens(results, { ...(preferIntervalH !== undefined ? { preferIntervalH } : {}), ...(centre ? { goalCentre: centre } : {}) });
  const failing = results.filter((r) => r.failedDraws > 0);
  if (failing.length)
    warnings.push({ severity: 'flag', code: 'regimen-draws-failed', message: `${failing.length} candidate regimen(s) have draws with no steady state or a model failure (e.g. elimination saturated): those draws count as toxic` });
  const nExplain = o.explainTop ?? 3;
  ranked.forEach((r, i) => {
    if (i < nExplain && target.goals.length) r.explanation = explainRegimen(r, target, single ? undefined : i + 1);
  });
  if (!o.target) warnings.push({ severity: 'note', code: 'no-target', message: `no target given: the current regimen (${formatRegimen(candidates[0])}) is evaluated without ranking; give --target to rank regimens` });
  if (!single && ranked.length && ranked[0].pTarget < 0.5)
    warnings.push({ severity: 'flag', code: 'low-attainment', message: `no candidate reaches the target in half of the plausible versions of this patient (best ${Math.round(100 * ranked[0].pTarget)} %): widen the dose range or interval list, or review the target` });

  const blocked = warnings.some((w) => w.severity === 'block');
  const status: Advice['status'] = blocked ? (o.overrideBlocks ? 'blocked-shown-on-request' : 'blocked') : 'advice';
  const shown = blocked && !o.overrideBlocks ? [] : single ? ranked : ranked.slice(0, 100);
  const chosen = ranked[0];
  const fc = chosen
    ? forecast({ prior, history: patient.doses, etaDraws: draws.eta, nDraws, regimen: { doseMg: chosen.doseMg, intervalH: chosen.intervalH, durationH: chosen.durationH, route: chosen.route, ...(chosen.loadingDoseMg !== undefined ? { loadingDoseMg: chosen.loadingDoseMg } : {}) }, startH: next.h, ...(o.belowMgL !== undefined ? { belowMgL: o.belowMgL } : {}) })
    : null;

  const fMap = new Float64Array(obj.nLevels);
  obj.predict(map.eta, fMap);
  const sev = { block: 0, flag: 1, note: 2 };
  warnings.sort((a, b) => sev[a.severity] - sev[b.severity]);
  return {
    status,
    caution: o.caution,
    patient: {
      id: patient.id,
      covariates: patient.covariates,
      derived: patient.derived,
      nDoses: patient.doses.length,
      nLevels: patient.levels.length,
      ...(patient.clockOrigin ? { clockOrigin: patient.clockOrigin } : {}),
      nextDoseH: next.h,
      nextDoseAssumed: next.assumed,
    },
    model: { ...population.provenance, structure: model.id, covariatesUsed, ...(posteriorFrom ? { posteriorFrom } : {}) },
    target,
    posterior: {
      ...summary,
      nDraws,
      diagnostics: draws.diagnostics,
      mapObjective: map.objective,
      levels: patient.levels.map((l, j) => ({ timeH: l.timeH, concMgL: l.valueMgL, censored: l.censored, predictedMap: sig(fMap[j]), priorPredictiveP: sig(ppc.pValues[j], 3), posteriorPredictiveP: sig(ppc.posteriorP[j], 3), iwres: Number.isFinite(ppc.iwres[j]) ? sig(ppc.iwres[j], 3) : null })),
    },
    regimens: shown,
    candidatesEvaluated: results.length,
    forecast: blocked && !o.overrideBlocks ? null : fc,
    warnings,
    seed: o.seed,
    engineVersion: o.engineVersion,
  };
}

/**
 * Loading dose: the maintenance dose times the ratio of the steady-state peak to the first-dose
 * peak at the MAP, rounded to the strength and capped at the maximum dose.
 */
function loadingDoseFor(model: StructuralModel, r: RegimenResult, mapParams: Float64Array, settings: RegimenSettings): number {
  const regimen: Regimen = { doseMg: r.doseMg, intervalH: r.intervalH, durationH: r.durationH, route: r.route };
  const ss = buildSteadyStateEvaluator(model, regimen, { peakDelayH: 0, thresholdMgL: NaN, gridIntervals: 2 });
  const out = new Float64Array(5);
  if (!ss.evaluate(mapParams, out, 0)) return r.doseMg;
  const T = r.route === 'infusion' ? r.durationH : 0;
  const first: Dose[] = [{ timeH: 0, amountMg: r.doseMg, route: r.route, durationH: T }];
  const f = new Float64Array(1);
  if (!model.prepare(first, [T > 0 ? T : 1e-9])(mapParams, f) || !(f[0] > 0)) return r.doseMg;
  const ld = roundTo((r.doseMg * out[2]) / f[0], settings.strengthMg);
  return Math.min(Math.max(ld, r.doseMg), settings.maxDoseMg);
}

export { formatRegimen, bandOf };
