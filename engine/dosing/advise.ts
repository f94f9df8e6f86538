/**
 * Dose advice for one patient, end to end: the patient's prior from the population model, the
 * posterior (MAP and draws), the forecast, the regimen table and the warnings. One entry point
 * for the CLI, the worker and the UI. Same inputs and seed give the same advice.
 */
import type { CovariateValue } from '../data/types.js';
import { structuralModelWithSolver } from '../models/catalogue.js';
import type { StructuralModel } from '../models/types.js';
import { createStreams } from '../rng/index.js';
import { forecast, timeToFallBelow, type Forecast } from './forecast.js';
import type { Regimen } from './metrics.js';
import { clockAt, fmtH, patientCovariate, type Patient } from './patient.js';
import type { ModelProvenance, PopulationModel } from './population.js';
import { buildLevelObjective, drawPrior, findMap, postFitDraws, samplePosterior, DEFAULT_SAMPLER, type SamplerDiagnostics } from './posterior.js';
import { buildPatientPrior, type PatientPrior } from './prior.js';
import { DEFAULT_REGIMEN_SETTINGS, evaluateRegimens, explainRegimen, formatRegimen, goalCentreOf, rankRegimens, regimenGrid, type RegimenResult } from './regimens.js';
import { bandOf, sig, type Band } from './summary.js';
import { checkRegimenSettings, ftThresholdMgL, resolvedBounds, type RegimenSettings, type TargetSpec } from './targets.js';
import { earlyToxicity, EARLY_INTERVALS, exposureNow, loadingDoseAtMap, LOADING_MIN_RATIO, type ExposureNow } from './transient.js';
import { describeModelValues, parameterUnit, UNITS } from './units.js';
import { implausibleTypical } from '../spec/modelSpec.js';
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

/** A dose as Plateau read it from the patient file (for the ward to check). */
export interface DoseAsRead {
  timeH: number;
  clock?: string;
  amountMg: number;
  route: string;
  durationH: number;
  ssIntervalH?: number;
}

export interface LevelAsRead {
  timeH: number;
  clock?: string;
  concMgL: number;
  censored: boolean;
  lloqMgL?: number;
  kind?: string;
}

/** Advice to hold or delay the next dose when the exposure now is above a toxic limit. */
export interface HoldAdvice {
  /** Level to wait for (mg/L) and why that level. */
  thresholdMgL: number;
  thresholdReason: string;
  /** From the end of the last given dose (h from the first dose). */
  fromH: number;
  /** Hours after fromH until the level falls below the threshold: median and bands. */
  hours: Band;
  /** Median time the level falls below the threshold (h from the first dose), and its clock time. */
  belowAtH: number;
  belowAtClock?: string;
  /** Share of draws still above the threshold at the horizon. */
  pAboveAtHorizon: number;
  horizonH: number;
}

export interface Advice {
  status: 'advice' | 'blocked' | 'blocked-shown-on-request';
  caution: string;
  /** Unit of every number in this record, by field name (parameters by name). */
  units: Record<string, string>;
  patient: {
    id: string;
    covariates: Record<string, CovariateValue>;
    derived: Record<string, string>;
    nDoses: number;
    nLevels: number;
    clockOrigin?: string;
    nextDoseH: number;
    nextDoseClock?: string;
    nextDoseAssumed: boolean;
    /** The doses and levels as interpreted (times in h from the first dose and, when given, clock). */
    doses: DoseAsRead[];
    levels: LevelAsRead[];
  };
  /** With a target: the current regimen continued, against the target (shown first). */
  current?: RegimenResult;
  /** The exposure now, from the doses given (24 h before the next dose). */
  now?: ExposureNow;
  /** When the exposure now is above a toxic limit: hold or delay the next dose. */
  hold?: HoldAdvice;
  /** When the advised regimens start (the next dose time, or later after a hold). */
  regimenStart: { timeH: number; clock?: string; delayed: boolean };
  model: ModelProvenance & { structure: string; covariatesUsed: Record<string, string>; /** Population values in words with units. */ values: string[] };
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


export function adviseDose(o: AdviceOptions): Advice {
  if (!o.caution || !o.caution.trim()) throw new AdviceError('the caution text is missing: dose advice is never given without it');
  const { population, patient } = o;
  const target: TargetSpec = o.target ?? NO_TARGET;
  if (o.regimenSettings) {
    const bad: string[] = [];
    checkRegimenSettings(o.regimenSettings, bad);
    if (bad.length) throw new AdviceError(`regimen settings out of bounds: ${bad.join('; ')}`);
  }
  if (o.nDraws !== undefined && !(Number.isInteger(o.nDraws) && o.nDraws >= 100 && o.nDraws <= 100_000)) throw new AdviceError(`draws must be an integer from 100 to 100000, got ${o.nDraws}`);
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
  // The patient's typical values (covariates applied) must be plausible before any prediction.
  for (const [name, v] of Object.entries(prior.typical)) {
    const why = implausibleTypical(name, v);
    if (why) warnings.push({ severity: 'block', code: 'implausible-typical', message: `the typical ${name} for this patient's covariates is ${why}: check the covariate values and the model's covariate relations` });
  }

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
  const summaryRef: { s?: ParameterSummary } = {};
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
  summaryRef.s = summary;
  if (failed > 0) warnings.push({ severity: 'flag', code: 'draws-failed', message: `${failed} of ${nDraws} draws gave parameters outside the model's domain and were left out` });

  // Regimens.
  const next = nextDoseTime(patient);
  if (next.note) warnings.push({ severity: 'note', code: 'next-dose-assumed', message: next.note });
  const settings = o.regimenSettings ?? target.regimen ?? DEFAULT_REGIMEN_SETTINGS;
  const lastRoute = patient.doses[patient.doses.length - 1].route;
  const route = lastRoute === 'oral' ? 'oral' : 'infusion';
  const continuation: Regimen | undefined = o.target ? undefined : continuationOf(patient);
  const single = o.evaluate ?? continuation;
  const candidates = single ? [single] : regimenGrid(settings, route);
  // The ODE-solved models cost far more per draw: their regimen table uses evenly spaced draws.
  const tableDraws = model.analytic ? nDraws : Math.min(nDraws, NONLINEAR_TABLE_DRAWS);
  const tableParams = tableDraws === nDraws ? paramDraws : thinRows(paramDraws, nP, nDraws, tableDraws);
  if (tableDraws < nDraws) warnings.push({ severity: 'note', code: 'table-draws', message: `the model is solved numerically: regimen probabilities use ${tableDraws} of the ${nDraws} draws (Monte Carlo error up to about ${Math.round(50 / Math.sqrt(tableDraws))} percentage points)` });
  if (candidates.length === 0)
    warnings.push({ severity: 'block', code: 'no-candidates', message: 'no candidate regimen fits the dose range, interval list, durations and rate limit of the regimen settings: widen them' });
  const loadingNotes = new Map<Regimen, string>();
  const evalInput = { model, draws: tableParams, nDraws: tableDraws, target };
  // Exposure now, from the doses already given (24 h before the next dose).
  const now = o.target ? exposureNow(model, tableParams, tableDraws, patient.doses, next.h, target) : undefined;
  const toxicNow = now !== undefined && now.pToxic !== null && now.pToxic > 0.5;
  // Loading doses only where indicated: with the drug on board the first peak is already high.
  let regimensIn: Regimen[] = candidates;
  if (o.loadingDose && !single) {
    let given = 0;
    regimensIn = candidates.map((r) => {
      if (toxicNow) return r;
      const dec = loadingDoseAtMap(model, mapVector, patient.doses, next.h, r, settings.strengthMg, settings.maxDoseMg);
      loadingNotes.set(r, dec.reason);
      if (dec.loadingDoseMg === undefined) return r;
      given++;
      return { ...r, loadingDoseMg: dec.loadingDoseMg };
    });
    if (toxicNow) warnings.push({ severity: 'note', code: 'loading-not-indicated', message: 'no loading dose: the exposure now is already above the toxic limit' });
    else if (given === 0)
      warnings.push({ severity: 'note', code: 'loading-not-indicated', message: `no loading dose for any candidate: with the drug already on board, the first dose that would reach the steady-state peak is less than ${Math.round((LOADING_MIN_RATIO - 1) * 100)} % above the maintenance dose (e.g. ${loadingNotes.get(candidates[0]) ?? ''})` });
  }
  // A loading dose the user asked to evaluate: said when it is not indicated (its overshoot is in P(toxic)).
  if (o.evaluate?.loadingDoseMg !== undefined) {
    const dec = loadingDoseAtMap(model, mapVector, patient.doses, next.h, { ...o.evaluate, loadingDoseMg: undefined }, settings.strengthMg, Math.max(settings.maxDoseMg, o.evaluate.loadingDoseMg));
    if (toxicNow || dec.loadingDoseMg === undefined)
      warnings.push({ severity: 'flag', code: 'loading-not-indicated', message: `the loading dose of ${o.evaluate.loadingDoseMg} mg is not indicated: ${toxicNow ? 'the exposure now is already above the toxic limit' : dec.reason}; its overshoot in the first intervals is in P(toxic)` });
  }
  const steadyToxic: Uint8Array[] = [];
  let results = evaluateRegimens(evalInput, regimensIn, steadyToxic);
  results.forEach((r, i) => {
    const note = loadingNotes.get(candidates[i]);
    if (note) r.loadingNote = note;
  });
  const preferIntervalH = currentTauOf(patient) ?? target.preferIntervalH;
  const centre = goalCentreOf(target);
  const rankOpts = { ...(preferIntervalH !== undefined ? { preferIntervalH } : {}), ...(centre ? { goalCentre: centre } : {}) };
  // Exposure above a toxic limit now: said first, with the time to wait before the next dose;
  // the new regimen then starts when the level has fallen (its first intervals are forecast from there).
  let hold: HoldAdvice | undefined;
  let startH = next.h;
  if (toxicNow && now) {
    const th = holdThreshold(target, o.belowMgL, rankRegimens(results, rankOpts)[0]);
    if (th) {
      const tb = timeToFallBelow(prior, patient.doses, draws.eta, nDraws, th.mgL, 168);
      const belowAtH = Math.max(next.h, Math.ceil((tb.fromH + tb.hours.median) * 4) / 4);
      const clock = clockAt(patient.clockOrigin, belowAtH);
      hold = { thresholdMgL: th.mgL, thresholdReason: th.reason, fromH: tb.fromH, hours: tb.hours, belowAtH, ...(clock ? { belowAtClock: clock } : {}), pAboveAtHorizon: tb.pAboveAtHorizon, horizonH: tb.horizonH };
      startH = belowAtH;
    }
    const when = hold
      ? `; the level is predicted to fall below ${hold.thresholdMgL} mg/L (${hold.thresholdReason}) at about ${hold.belowAtClock ?? fmtH(hold.belowAtH)} (${fmtH(hold.belowAtH)} from the first dose; 80 % interval ${fmtH(sig(hold.fromH + hold.hours.q10, 3))}-${fmtH(sig(hold.fromH + hold.hours.q90, 3))}${hold.pAboveAtHorizon > 0 ? `; ${Math.round(100 * hold.pAboveAtHorizon)} % still above after ${hold.horizonH} h` : ''}); the regimens below start then`
      : '';
    warnings.push({
      severity: 'flag',
      code: 'toxic-now',
      message: `exposure now is above the toxic limit (${now.exceeded.join('; ') || 'see the exposure now'}; P(toxic now) ${Math.round(100 * (now.pToxic ?? 0))} %): consider holding or delaying the next dose${when}; re-check a level before restarting`,
    });
  }
  // P(toxic) over the intervals the forecast shows as well as at steady state. ODE models: the
  // first-interval check runs on the best candidates by the steady-state ranking only.
  const earlyInput = { model, draws: tableParams, nDraws: tableDraws, history: patient.doses, startH, target, threshold: ftThresholdOf(target) };
  const applyEarly = (list: RegimenResult[], flags: Uint8Array[], regs: Regimen[]) => {
    const early = earlyToxicity(earlyInput, regs, flags);
    list.forEach((r, i) => {
      if (r.pToxic === null) return;
      r.pToxicSteadyState = r.pToxic;
      r.pToxicFirstIntervals = sig(early[i].pToxicEarly, 4);
      r.pToxic = sig(early[i].pToxicAny, 4);
    });
  };
  if (target.toxic.length && results.length) {
    if (model.analytic) applyEarly(results, steadyToxic, regimensIn);
    else {
      const order = rankRegimens(results, rankOpts).slice(0, 20);
      const idx = order.map((r) => results.indexOf(r));
      applyEarly(order, idx.map((i) => steadyToxic[i]), idx.map((i) => regimensIn[i]));
      const rest = results.filter((r) => !order.includes(r));
      results = [...order, ...rest];
      if (rest.length) warnings.push({ severity: 'note', code: 'early-toxicity-top', message: `the model is solved numerically: P(toxic) in the first intervals after the change is computed for the best 20 candidates by the steady-state ranking; the others show steady-state P(toxic) only` });
    }
  }
  const ranked = single ? results : rankRegimens(results, rankOpts);
  // The current regimen continued at the next dose time, against the target: shown first.
  let current: RegimenResult | undefined;
  if (o.target) {
    const flags: Uint8Array[] = [];
    current = evaluateRegimens(evalInput, [continuationOf(patient)], flags)[0];
    if (target.toxic.length) {
      const early = earlyToxicity({ ...earlyInput, startH: next.h }, [continuationOf(patient)], flags)[0];
      current.pToxicSteadyState = current.pToxic;
      current.pToxicFirstIntervals = sig(early.pToxicEarly, 4);
      current.pToxic = sig(early.pToxicAny, 4);
    }
    current.explanation = `Current regimen continued: ${explainRegimen(current, target)}`;
  }
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

  const blockedBefore = warnings.some((w) => w.severity === 'block');
  const chosen = ranked[0];
  const fc = chosen
    ? forecast({ prior, history: patient.doses, etaDraws: draws.eta, nDraws, regimen: { doseMg: chosen.doseMg, intervalH: chosen.intervalH, durationH: chosen.durationH, route: chosen.route, ...(chosen.loadingDoseMg !== undefined ? { loadingDoseMg: chosen.loadingDoseMg } : {}) }, startH, nIntervals: EARLY_INTERVALS, target, ...(o.belowMgL !== undefined ? { belowMgL: o.belowMgL } : {}) })
    : null;
  // Any non-finite prediction, metric or probability blocks the advice with the reason.
  const nonFinite = nonFiniteFigures(target, chosen, current, fc, now, summaryRef);
  if (nonFinite.length) warnings.push({ severity: 'block', code: 'non-finite', message: `the model gave non-finite or impossible figures (${nonFinite.slice(0, 6).join('; ')}${nonFinite.length > 6 ? `; and ${nonFinite.length - 6} more` : ''}): no advice can rest on them; check the model's values and units` });
  const blocked = blockedBefore || nonFinite.length > 0;
  const status: Advice['status'] = blocked ? (o.overrideBlocks ? 'blocked-shown-on-request' : 'blocked') : 'advice';
  const shown = blocked && !o.overrideBlocks ? [] : single ? ranked : ranked.slice(0, 100);

  const fMap = new Float64Array(obj.nLevels);
  obj.predict(map.eta, fMap);
  // Ward clock times beside every time of the record in the checks' messages.
  if (patient.clockOrigin) for (const w of warnings) w.message = withClockTimes(w.message, patient.clockOrigin);
  const sev = { block: 0, flag: 1, note: 2 };
  warnings.sort((a, b) => sev[a.severity] - sev[b.severity]);
  return {
    status,
    caution: o.caution,
    units: { ...UNITS, ...Object.fromEntries(Object.keys(summary.map).map((n) => [n, parameterUnit(n)])) },
    patient: {
      id: patient.id,
      covariates: patient.covariates,
      derived: patient.derived,
      nDoses: patient.doses.length,
      nLevels: patient.levels.length,
      ...(patient.clockOrigin ? { clockOrigin: patient.clockOrigin } : {}),
      nextDoseH: next.h,
      ...(clockAt(patient.clockOrigin, next.h) ? { nextDoseClock: clockAt(patient.clockOrigin, next.h) } : {}),
      nextDoseAssumed: next.assumed,
      doses: patient.doses.map((d) => ({ timeH: sig(d.timeH, 6), ...(patient.clockOrigin ? { clock: clockAt(patient.clockOrigin, d.timeH) } : {}), amountMg: d.amountMg, route: d.route, durationH: d.durationH, ...(d.steadyStateIntervalH ? { ssIntervalH: d.steadyStateIntervalH } : {}) })),
      levels: patient.levels.map((l, j) => ({ timeH: sig(l.timeH, 6), ...(patient.clockOrigin ? { clock: clockAt(patient.clockOrigin, l.timeH) } : {}), concMgL: l.valueMgL, censored: l.censored, ...(l.lloqMgL !== undefined ? { lloqMgL: l.lloqMgL } : {}), ...(patient.levelKinds[j] ? { kind: patient.levelKinds[j] } : {}) })),
    },
    ...(current && !(blocked && !o.overrideBlocks) ? { current } : {}),
    ...(now ? { now } : {}),
    ...(hold ? { hold } : {}),
    regimenStart: { timeH: startH, ...(clockAt(patient.clockOrigin, startH) ? { clock: clockAt(patient.clockOrigin, startH) } : {}), delayed: startH !== next.h },
    model: { ...population.provenance, structure: model.id, covariatesUsed, values: describeModelValues(population.spec), ...(posteriorFrom ? { posteriorFrom } : {}) },
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

/** "at 35.5 h" -> "at 35.5 h (2026-11-24 19:30)" for times counted from the first dose. */
function withClockTimes(message: string, origin: string): string {
  return message.replace(/\b(at|between|and|from|until|started at) (\d+(?:\.\d+)?) h\b(?! \(\d{4}-)/g, (m, word: string, h: string) => {
    const clock = clockAt(origin, Number(h));
    return clock ? `${word} ${h} h (${clock})` : m;
  });
}

/** The last dose continued at the current interval. */
function continuationOf(patient: Patient): Regimen {
  const last = patient.doses[patient.doses.length - 1];
  return { doseMg: last.amountMg, intervalH: currentTauOf(patient) ?? 12, durationH: last.durationH, route: last.route };
}

function ftThresholdOf(target: TargetSpec): number {
  return [...target.goals, ...target.toxic].some((c) => c.metric === 'ftAbove') ? ftThresholdMgL(target) : NaN;
}

/**
 * The level to wait for before the next dose: --below when given, else the target's trough limit
 * (a toxic trough, then a trough goal's maximum), else the steady-state trough (median) of the
 * best regimen, the level its doses would keep returning to.
 */
function holdThreshold(target: TargetSpec, belowMgL: number | undefined, best: RegimenResult | undefined): { mgL: number; reason: string } | undefined {
  if (belowMgL !== undefined) return { mgL: belowMgL, reason: 'the level given with --below' };
  const tox = target.toxic.find((c) => c.metric === 'trough');
  if (tox) return { mgL: resolvedBounds(target, tox).max, reason: 'the toxic trough limit of the target' };
  const goal = target.goals.find((c) => c.metric === 'trough' && c.max !== undefined);
  if (goal) return { mgL: resolvedBounds(target, goal).max, reason: 'the upper trough of the target' };
  const t = best?.metrics.trough?.median;
  if (t !== undefined && Number.isFinite(t) && t > 0) return { mgL: sig(t, 3), reason: `the steady-state trough of the advised regimen, ${formatRegimen(best as RegimenResult)}` };
  return undefined;
}

/** Every non-finite figure the advice would show, named. */
function nonFiniteFigures(target: TargetSpec, chosen: RegimenResult | undefined, current: RegimenResult | undefined, fc: Forecast | null, now: ExposureNow | undefined, summary: { s?: ParameterSummary }): string[] {
  const out: string[] = [];
  const band = (b: Band | undefined, what: string) => {
    if (b && ![b.median, b.q10, b.q90, b.q025, b.q975].every(Number.isFinite)) out.push(`${what} ${b.median}`);
  };
  // Draws with no steady state (accumulation) are counted as toxic, not figures: the metric
  // bands of a regimen are checked only for the advised one.
  const regimen = (r: RegimenResult | undefined, what: string, bands: boolean) => {
    if (!r) return;
    if (target.goals.length && !Number.isFinite(r.pTarget)) out.push(`${what}: P(target) ${r.pTarget}`);
    if (r.pToxic !== null && target.toxic.length && !Number.isFinite(r.pToxic)) out.push(`${what}: P(toxic) ${r.pToxic}`);
    if (bands) for (const [id, b] of Object.entries(r.metrics)) band(b, `${what}: ${id}`);
  };
  regimen(chosen, 'best regimen', true);
  regimen(current, 'current regimen', false);
  if (fc) {
    for (const iv of fc.intervals) for (const k of ['trough', 'peak', 'auc24'] as const) band(iv[k], `forecast interval ${iv.index} ${k}`);
    if (!fc.curve.median.every(Number.isFinite)) out.push('forecast curve');
  }
  if (now) for (const k of ['levelAtNextDose', 'highest', 'auc24'] as const) band(now[k], `exposure now ${k}`);
  const s = summary.s;
  if (s) for (const k of ['map', 'mean', 'q05', 'q95'] as const) for (const [name, v] of Object.entries(s[k])) if (!(Number.isFinite(v) && v >= 0)) out.push(`posterior ${k} of ${name} ${v}`);
  return out;
}

export { formatRegimen, bandOf };
