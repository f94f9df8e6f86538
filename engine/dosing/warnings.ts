/**
 * Checks that block or flag dose advice. 'block': the advice must not be used as it stands
 * (the CLI withholds the regimen table unless asked to show it anyway); 'flag': shown
 * prominently beside the advice; 'note': context.
 */
import type { Dose, Observation } from '../data/types.js';
import type { RngStream } from '../rng/index.js';
import { normalCdf } from '../rng/index.js';
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
  if (!ranges) return [{ severity: 'flag', code: 'ranges-unknown', message: 'the model carries no covariate ranges (model spec: "covariateRanges"; fit: the fitted data\'s ranges): whether this patient lies inside the population the model was built on cannot be checked' }];
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

/** Rule of the level-consistency check (stated in every warning it gives). */
export const CONSISTENCY_RULE = {
  /** BLOCK: |IWRES| at the MAP above this, or a prior or posterior predictive tail probability below blockP. */
  blockIwres: 4,
  blockP: 0.001,
  /** BLOCK also when the level and its MAP prediction differ more than this factor with |IWRES| above foldMinIwres. */
  fold: 10,
  foldMinIwres: 1,
  /** FLAG: |IWRES| above this, or a predictive tail probability below flagP. */
  flagIwres: 3,
  flagP: 0.01,
} as const;

const RULE_TEXT = `rule: BLOCK when |IWRES| > ${CONSISTENCY_RULE.blockIwres}, a prior or posterior predictive tail P < ${CONSISTENCY_RULE.blockP}, or a ${CONSISTENCY_RULE.fold}-fold gap to the MAP prediction with |IWRES| > ${CONSISTENCY_RULE.foldMinIwres}; FLAG when |IWRES| > ${CONSISTENCY_RULE.flagIwres} or a tail P < ${CONSISTENCY_RULE.flagP}`;

/** P(y_rep <= y | f) under the residual error model (exact, no simulation). */
function residualCdf(rm: PatientPrior['residual']['model'], a: number, b: number, f: number, y: number): number {
  if (rm === 'log-additive') {
    if (!(f > 0)) return y > 0 ? 1 : 0.5;
    return y > 0 ? normalCdf((Math.log(y) - Math.log(f)) / a) : 0;
  }
  const sd = residualSd(rm, a, b, f);
  if (!(sd > 0)) return y > f ? 1 : y < f ? 0 : 0.5;
  return normalCdf((y - f) / sd);
}

export interface PredictiveCheck {
  warnings: AdviceWarning[];
  /** Prior predictive P(y_rep <= y) per level. */
  pValues: number[];
  /** Posterior predictive P(y_rep <= y) per level (the posterior draws with the residual error). */
  posteriorP: number[];
  /** Standardised residual at the MAP; +-Infinity when the MAP prediction cannot produce the level at all, NaN for censored levels. */
  iwres: number[];
}

/**
 * Level consistency. For each level: the standardised residual at the MAP (IWRES), the prior
 * predictive and the posterior predictive tail probabilities, P(y_rep <= y) averaged over the
 * draws with the residual error's distribution (Gelman, Meng & Stern, Stat Sinica 1996;6:733-807,
 * from memory). A level far outside the model even after fitting (a prior that cannot bend to
 * it, e.g. a collapsed BSV) is caught by the posterior check and the IWRES, which the prior
 * check alone can miss.
 */
export function checkPredictive(prior: PatientPrior, obj: LevelObjective, map: MapResult, rng: RngStream, posteriorEta?: Float64Array, nPosteriorDraws = 0, nSim = 1000): PredictiveCheck {
  const out: AdviceWarning[] = [];
  const n = obj.nLevels;
  if (n === 0) return { warnings: out, pValues: [], posteriorP: [], iwres: [] };
  const d = prior.nEta;
  const eta = new Float64Array(d);
  const z = new Float64Array(d);
  const f = new Float64Array(n);
  const { model: rm, a, b } = prior.residual;
  const L = prior.omegaChol;
  const refOf = (j: number) => {
    const o = obj.levels[j];
    return o.censored ? (o.lloqMgL ?? o.valueMgL) : o.valueMgL;
  };
  // Prior predictive: eta from the prior, the residual integrated exactly.
  const priorSum = new Float64Array(n);
  let priorOk = 0;
  for (let s = 0; s < nSim; s++) {
    rng.fillNormal(z);
    for (let i = 0; i < d; i++) {
      let v = 0;
      for (let j = 0; j <= i; j++) v += L[i * d + j] * z[j];
      eta[i] = v;
    }
    if (!obj.predict(eta, f)) continue;
    priorOk++;
    for (let j = 0; j < n; j++) priorSum[j] += residualCdf(rm, a, b, f[j], refOf(j));
  }
  // Posterior predictive: the posterior draws (or the MAP alone when none are given).
  const postSum = new Float64Array(n);
  let postOk = 0;
  const nPost = posteriorEta && nPosteriorDraws > 0 ? nPosteriorDraws : 1;
  for (let k = 0; k < nPost; k++) {
    if (posteriorEta && nPosteriorDraws > 0) for (let i = 0; i < d; i++) eta[i] = posteriorEta[k * d + i];
    else eta.set(map.eta);
    if (!obj.predict(eta, f)) continue;
    postOk++;
    for (let j = 0; j < n; j++) postSum[j] += residualCdf(rm, a, b, f[j], refOf(j));
  }
  const iwres: number[] = [];
  const mapOk = obj.predict(map.eta, f);
  for (let j = 0; j < n; j++) {
    const o = obj.levels[j];
    if (o.censored || !mapOk) {
      iwres.push(NaN);
      continue;
    }
    let r: number;
    if (rm === 'log-additive') r = f[j] > 0 ? (Math.log(o.valueMgL) - Math.log(f[j])) / a : Infinity;
    else {
      const sd = residualSd(rm, a, b, f[j]);
      r = sd > 0 ? (o.valueMgL - f[j]) / sd : o.valueMgL === f[j] ? 0 : (o.valueMgL - f[j]) * Infinity;
    }
    iwres.push(r === r ? r : Infinity);
  }
  const pValues: number[] = [];
  const posteriorP: number[] = [];
  for (let j = 0; j < n; j++) {
    const o = obj.levels[j];
    const pPrior = priorOk ? priorSum[j] / priorOk : NaN;
    const pPost = postOk ? postSum[j] / postOk : NaN;
    pValues.push(pPrior);
    posteriorP.push(pPost);
    const at = `level ${o.censored ? '<' : ''}${fmt(o.valueMgL)} mg/L at ${fmt(o.timeH)} h`;
    if (!mapOk || !(pPost === pPost)) {
      out.push({ severity: 'block', code: 'level-inconsistent', message: `${at}: the model could not predict this level for this patient (the prediction failed), so its consistency cannot be checked; check the dose record and the model` });
      continue;
    }
    const r = iwres[j];
    // Censored levels: only "the model predicts it clearly above the LLOQ" is inconsistent.
    const tailPost = o.censored ? pPost : Math.min(pPost, 1 - pPost);
    const tailPrior = o.censored ? pPrior : Math.min(pPrior, 1 - pPrior);
    const high = o.censored ? false : pPost > 0.5;
    const side = o.censored ? 'below the LLOQ where the model predicts it clearly above' : high ? 'higher than the model can explain for this patient' : 'lower than the model can explain for this patient';
    const tailText = (t: number) => (t === t ? (t < 1e-4 ? '< 0.0001' : `= ${Number(t.toPrecision(2))}`) : 'n/a');
    const rel = o.censored ? 'y_rep <= LLOQ' : high ? 'y_rep >= y' : 'y_rep <= y';
    const fig = `MAP prediction ${fmt(f[j])} mg/L${o.censored ? '' : `, IWRES ${Number.isFinite(r) ? r.toFixed(1) : r > 0 ? '+inf' : '-inf'}`}, posterior predictive P(${rel}) ${tailText(tailPost)}, prior predictive P ${tailText(tailPrior)}`;
    const absR = o.censored ? 0 : Math.abs(r);
    const tp = tailPrior === tailPrior ? tailPrior : 1;
    // A ten-fold gap between the level and its fitted value is implausible whatever the error model says.
    const fold = !o.censored && absR > CONSISTENCY_RULE.foldMinIwres && (f[j] * CONSISTENCY_RULE.fold < o.valueMgL || o.valueMgL * CONSISTENCY_RULE.fold < f[j]);
    if (fold || absR > CONSISTENCY_RULE.blockIwres || tailPost < CONSISTENCY_RULE.blockP || tp < CONSISTENCY_RULE.blockP)
      out.push({ severity: 'block', code: 'level-inconsistent', message: `${at} is far ${side} (${fig}; ${RULE_TEXT}): check the sample time, the dose record, the unit and the assay, or whether this model describes this patient` });
    else if (absR > CONSISTENCY_RULE.flagIwres || tailPost < CONSISTENCY_RULE.flagP || tp < CONSISTENCY_RULE.flagP)
      out.push({ severity: 'flag', code: 'level-unusual', message: `${at} is ${side} (${fig}; ${RULE_TEXT}): check its time and the dose times, or whether the patient changed (renal function, fluid)` });
  }
  return { warnings: out, pValues, posteriorP, iwres };
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
