/**
 * Checks that block or flag dose advice. 'block': the advice must not be used as it stands
 * (the CLI withholds the regimen table unless asked to show it anyway); 'flag': shown
 * prominently beside the advice; 'note': context.
 */
import type { Dose, Observation } from '../data/types.js';
import type { RngStream } from '../rng/index.js';
import { residualSd } from '../stats/residual.js';
import type { LevelKind, PatientNote, RenalRecord } from './patient.js';
import type { LevelObjective, MapResult, SamplerDiagnostics } from './posterior.js';
import type { PatientPrior } from './prior.js';

export type Severity = 'block' | 'flag' | 'note';

export interface AdviceWarning {
  severity: Severity;
  code: string;
  message: string;
}

const fmt = (x: number) => (Math.abs(x) >= 100 ? x.toFixed(0) : String(Number(x.toPrecision(3))));

/** Patient covariates against the ranges the model was built on. */
export function checkCovariateRanges(values: ReadonlyMap<string, unknown>, ranges: Record<string, [number, number]> | null): AdviceWarning[] {
  if (!ranges) return [{ severity: 'flag', code: 'ranges-unknown', message: 'the model carries no covariate ranges: this patient may lie outside the population it was built on' }];
  const out: AdviceWarning[] = [];
  for (const [name, [lo, hi]] of Object.entries(ranges)) {
    const v = values.get(name);
    if (v === undefined) {
      out.push({ severity: 'note', code: 'covariate-range-unchecked', message: `the model was built on ${name} ${fmt(lo)}-${fmt(hi)}; the patient file has no ${name}, so that range is not checked` });
      continue;
    }
    if (typeof v !== 'number') continue;
    if (v < lo || v > hi)
      out.push({ severity: 'block', code: 'covariate-out-of-range', message: `${name} = ${fmt(v)} lies outside the range the model was built on (${fmt(lo)}-${fmt(hi)}): the model extrapolates for this patient` });
  }
  return out;
}

/** Timing of levels against the dose history. */
export function checkLevelTiming(doses: readonly Dose[], levels: readonly Observation[], nEta: number, kinds: ReadonlyArray<LevelKind | undefined> = []): AdviceWarning[] {
  const out: AdviceWarning[] = [];
  if (levels.length === 0) {
    out.push({ severity: 'flag', code: 'no-levels', message: 'no measured levels: the advice rests on the population model alone; take levels as the protocol requires' });
    return out;
  }
  const informative = levels.filter((o) => !o.censored).length;
  if (informative === 0) out.push({ severity: 'flag', code: 'all-censored', message: 'every level is below the LLOQ: they bound the exposure but carry little information' });
  else if (nEta >= 2 && informative === 1) out.push({ severity: 'note', code: 'one-level', message: 'one level informs mostly clearance (or the parameter the level is most sensitive to); the others stay close to the population values' });
  for (const o of levels) {
    const at = `level at ${fmt(o.timeH)} h${o.sourceRow !== undefined ? ` (levels[${o.sourceRow - 1}])` : ''}`;
    const during = doses.find((d) => d.durationH > 0 && o.timeH > d.timeH && o.timeH < d.timeH + d.durationH);
    if (during) out.push({ severity: 'flag', code: 'level-during-infusion', message: `${at} was drawn during the infusion started at ${fmt(during.timeH)} h: check the sample time, and that it was not drawn from the infusion line` });
    if (doses.some((d) => d.timeH === o.timeH)) out.push({ severity: 'note', code: 'level-at-dose-time', message: `${at} is at a dose time: taken as drawn just before that dose (trough)` });
    const last = [...doses].reverse().find((d) => d.timeH < o.timeH);
    const next = doses.find((d) => d.timeH >= o.timeH);
    const kind = kinds[levels.indexOf(o)];
    // A trough is drawn shortly before the next dose; a peak after the end of an infusion
    // (common practice: within about 2 h before the dose, within about 3 h after the end).
    if (kind === 'trough' && next && next.timeH - o.timeH > 2)
      out.push({ severity: 'flag', code: 'trough-timing', message: `${at} is marked as a trough but was drawn ${fmt(next.timeH - o.timeH)} h before the next dose: check the time (it is used at the time given)` });
    if (kind === 'trough' && last && !next && o.timeH - (last.timeH + last.durationH) < 2)
      out.push({ severity: 'flag', code: 'trough-timing', message: `${at} is marked as a trough but was drawn ${fmt(o.timeH - last.timeH)} h after a dose start: check the time and whether the next dose is missing from the history` });
    if (kind === 'peak') {
      if (!last) out.push({ severity: 'flag', code: 'peak-timing', message: `${at} is marked as a peak but no dose precedes it` });
      else if (o.timeH < last.timeH + last.durationH) out.push({ severity: 'flag', code: 'peak-timing', message: `${at} is marked as a peak but was drawn before the end of the infusion (${fmt(last.timeH + last.durationH)} h): check the time` });
      else if (o.timeH - (last.timeH + last.durationH) > 3) out.push({ severity: 'flag', code: 'peak-timing', message: `${at} is marked as a peak but was drawn ${fmt(o.timeH - last.timeH - last.durationH)} h after the end of the infusion: check the time, or whether a dose is missing` });
    }
    if (last && o.timeH - last.timeH > 7 * 24) out.push({ severity: 'flag', code: 'level-long-after-dose', message: `${at} is more than 7 days after the previous dose: check the dose history is complete` });
  }
  return out;
}

/**
 * Prior predictive check: how extreme each level is under the model for this patient before
 * seeing any level (simulated p-values); and the standardised residuals at the MAP.
 */
export function checkPredictive(prior: PatientPrior, obj: LevelObjective, map: MapResult, rng: RngStream, nSim = 1000): { warnings: AdviceWarning[]; pValues: number[]; iwres: number[] } {
  const out: AdviceWarning[] = [];
  const n = obj.nLevels;
  if (n === 0) return { warnings: out, pValues: [], iwres: [] };
  const d = prior.nEta;
  const eta = new Float64Array(d);
  const z = new Float64Array(d);
  const f = new Float64Array(n);
  const below = new Float64Array(n);
  let ok = 0;
  const { model: rm, a, b } = prior.residual;
  const L = prior.omegaChol;
  for (let s = 0; s < nSim; s++) {
    rng.fillNormal(z);
    for (let i = 0; i < d; i++) {
      let v = 0;
      for (let j = 0; j <= i; j++) v += L[i * d + j] * z[j];
      eta[i] = v;
    }
    if (!obj.predict(eta, f)) continue;
    ok++;
    for (let j = 0; j < n; j++) {
      const o = obj.levels[j];
      const e = rng.normal();
      const yRep = rm === 'log-additive' ? f[j] * Math.exp(a * e) : f[j] + residualSd(rm, a, b, f[j]) * e;
      const ref = o.censored ? (o.lloqMgL ?? o.valueMgL) : o.valueMgL;
      if (yRep < ref) below[j]++;
    }
  }
  const pValues: number[] = [];
  for (let j = 0; j < n; j++) {
    const o = obj.levels[j];
    const p = ok ? below[j] / ok : NaN;
    pValues.push(p);
    const at = `level ${fmt(o.valueMgL)} mg/L at ${fmt(o.timeH)} h`;
    const tail = Math.min(p, 1 - p);
    const side = o.censored ? 'below the LLOQ, where the model predicts it clearly above' : p < 0.5 ? 'lower than the model allows for this patient' : 'higher than the model allows for this patient';
    if (o.censored) {
      if (p < 0.001) out.push({ severity: 'block', code: 'level-inconsistent', message: `${at} is ${side} (prior predictive P < 0.001): check the sample time, the dose record and the assay, or whether this model describes this patient` });
      continue;
    }
    if (tail < 0.001) out.push({ severity: 'block', code: 'level-inconsistent', message: `${at} is far ${side} (prior predictive P = ${p.toFixed(4)}): check the sample time, the dose record, the unit and the assay, or whether this model describes this patient` });
    else if (tail < 0.01) out.push({ severity: 'flag', code: 'level-unusual', message: `${at} is ${side} (prior predictive P = ${p.toFixed(3)}): check the sample and dose times` });
  }
  const iwres: number[] = [];
  if (obj.predict(map.eta, f))
    for (let j = 0; j < n; j++) {
      const o = obj.levels[j];
      if (o.censored) {
        iwres.push(NaN);
        continue;
      }
      const r = rm === 'log-additive' ? (Math.log(o.valueMgL) - Math.log(f[j])) / a : (o.valueMgL - f[j]) / residualSd(rm, a, b, f[j]);
      iwres.push(r);
      if (Math.abs(r) > 3) out.push({ severity: 'flag', code: 'level-poorly-fitted', message: `level ${fmt(o.valueMgL)} mg/L at ${fmt(o.timeH)} h is not explained by the patient's estimate (standardised residual ${r.toFixed(1)}): check its time, or whether the patient changed (renal function, fluid)` });
    }
  return { warnings: out, pValues, iwres };
}

/** MAP and sampler diagnostics. */
export function checkSampler(map: MapResult, diag: SamplerDiagnostics, etaNames: readonly string[]): AdviceWarning[] {
  const out: AdviceWarning[] = [];
  if (!map.converged) out.push({ severity: 'flag', code: 'map-not-converged', message: 'the MAP optimiser did not meet its convergence test; the estimate may be imprecise' });
  if (map.otherOptima > 0) out.push({ severity: 'flag', code: 'map-multimodal', message: `${map.otherOptima} start(s) ended at another local optimum: the levels may support more than one explanation` });
  if (diag.method !== 'mcmc') return out;
  if (diag.proposalFromPrior) out.push({ severity: 'flag', code: 'hessian-not-pd', message: 'the curvature at the MAP was not positive definite; the sampler used the prior covariance for its proposals' });
  diag.rhat.forEach((r, i) => {
    if (!(r < 1.1)) out.push({ severity: 'block', code: 'mcmc-not-converged', message: `posterior chains disagree for ${etaNames[i]} (split R-hat ${r.toFixed(2)} >= 1.1): the posterior is not reliable` });
    else if (r >= 1.05) out.push({ severity: 'flag', code: 'mcmc-rhat', message: `split R-hat for ${etaNames[i]} is ${r.toFixed(3)} (>= 1.05)` });
  });
  diag.ess.forEach((e, i) => {
    if (e < 200) out.push({ severity: 'flag', code: 'mcmc-low-ess', message: `effective sample size for ${etaNames[i]} is ${Math.round(e)} (< 200): probabilities carry more Monte Carlo error` });
  });
  const acc = [diag.acceptanceIndependence ?? 1, diag.acceptanceRandomWalk ?? 1];
  if (Math.max(...acc) < 0.05) out.push({ severity: 'flag', code: 'mcmc-low-acceptance', message: `the sampler accepted few proposals (${(100 * Math.max(...acc)).toFixed(1)} %)` });
  return out;
}

/** A posterior so wide that the regimen choice is barely informed. */
export function checkPosteriorWidth(name: string, q05: number, q95: number, priorSdEta: number, postSdEta: number, nLevels: number): AdviceWarning[] {
  const out: AdviceWarning[] = [];
  if (q95 / q05 > 3) out.push({ severity: 'flag', code: 'wide-posterior', message: `the 90 % interval of ${name} spans a factor ${fmt(q95 / q05)} (${fmt(q05)}-${fmt(q95)}): the advice is uncertain; more levels would narrow it` });
  if (nLevels > 0 && priorSdEta > 0 && postSdEta / priorSdEta > 0.9) out.push({ severity: 'note', code: 'levels-uninformative', message: `the levels hardly narrow ${name} (posterior SD ${Math.round((100 * postSdEta) / priorSdEta)} % of the population SD); sample timing may not inform it` });
  return out;
}

/**
 * Renal function changing across the levels: a serum creatinine rise >= 0.3 mg/dL within 48 h or
 * to >= 1.5 x the lowest earlier value (KDIGO 2012 AKI criteria, from memory), or a fall by a third.
 */
export function checkRenalChange(renal: readonly RenalRecord[]): AdviceWarning[] {
  const out: AdviceWarning[] = [];
  for (let j = 1; j < renal.length; j++) {
    for (let i = 0; i < j; i++) {
      const a = renal[i];
      const b = renal[j];
      const rise = b.scrMgDl - a.scrMgDl;
      if ((rise >= 0.3 && b.timeH - a.timeH <= 48) || b.scrMgDl >= 1.5 * a.scrMgDl) {
        out.push({ severity: 'flag', code: 'renal-change', message: `serum creatinine rose from ${fmt(a.scrMgDl)} to ${fmt(b.scrMgDl)} mg/dL between ${fmt(a.timeH)} h and ${fmt(b.timeH)} h: clearance is probably falling, so the levels describe a patient who is changing; re-check levels and renal function before relying on the advice` });
        return out;
      }
      if (b.scrMgDl <= (2 / 3) * a.scrMgDl) {
        out.push({ severity: 'flag', code: 'renal-change', message: `serum creatinine fell from ${fmt(a.scrMgDl)} to ${fmt(b.scrMgDl)} mg/dL between ${fmt(a.timeH)} h and ${fmt(b.timeH)} h: clearance may be rising; the advice may under-dose` });
        return out;
      }
    }
  }
  return out;
}

export function fromPatientNotes(notes: readonly PatientNote[]): AdviceWarning[] {
  return notes.map((n) => ({ severity: n.severity, code: n.code, message: n.message }));
}
