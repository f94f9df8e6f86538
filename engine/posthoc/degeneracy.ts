/**
 * Collapse and degeneracy checks on a finished fit: a BSV that fell towards zero (and whether
 * the data support that), a residual error that collapsed, a -2LL that is not finite or is
 * negative, an estimate at a bound, a CV that is not finite. Any finding marks the fit as not
 * fit for use as a prior; the fit summary prints the findings at the top.
 *
 * Whether the data support a collapsed BSV is judged from the data's own information about each
 * subject's random effect: the curvature of log p(y_i | eta) in that component at the subject's
 * conditional mode (prior left out), I_ik = -d2/d eta_k^2 log p(y_i | eta). 1/sqrt(I_ik) is how
 * closely subject i's levels alone pin its parameter (log scale). When the median over subjects
 * is below DATA_RESOLUTION, the levels would have shown a between-subject spread of that size if
 * it existed: the data do not support a BSV there, and the collapse is a finding about the data
 * (remove that BSV). Otherwise the data cannot tell, and the collapse may be an artefact of the
 * estimator: refit with other seeds, or fix the BSV from other knowledge. Thresholds are common
 * practice, not from a source.
 */
import type { CompiledModel, PopulationParameters } from '../stats/model.js';
import type { SubjectDensity } from './density.js';
import type { ModeResult } from './modes.js';

/** A BSV SD below this (about a 3 % CV) has fallen towards zero. */
export const COLLAPSED_BSV_SD = 0.03;
/** Median data-only SD of a subject's parameter (log scale) below which the data resolve a BSV of this size. */
export const DATA_RESOLUTION = 0.1;
/** A residual SD below this share of the median level (additive) or this value (proportional / log scale) has collapsed. */
export const COLLAPSED_RESIDUAL_SHARE = 1e-3;
/** Correlations beyond this are at their bound. */
export const CORRELATION_BOUND = 0.99;

export type DegeneracyCode = 'bsv-collapsed' | 'residual-collapsed' | 'minus2ll-not-finite' | 'minus2ll-negative' | 'estimate-at-bound' | 'estimate-not-finite' | 'cv-not-finite';

export interface DegeneracyFinding {
  code: DegeneracyCode;
  /** Parameter name ("CL"), residual term ("a", "b") or "-2LL". */
  parameter: string;
  message: string;
  /** bsv-collapsed only: the median data-only SD of the subjects' parameter (log scale), null when not computable. */
  dataSd?: number | null;
  /** bsv-collapsed only: true when the data resolve a BSV of DATA_RESOLUTION and show none (the data do not support a BSV). */
  dataShowNoVariability?: boolean;
}

export interface DegeneracyReport {
  /** false when any finding is present: do not use this fit as a prior. */
  usableAsPrior: boolean;
  findings: DegeneracyFinding[];
}

export interface DegeneracyInput {
  model: CompiledModel;
  theta: PopulationParameters;
  density?: SubjectDensity | null;
  modes?: ModeResult | null;
  /** -2LL reported for the fit (importance sampling or linearised); undefined when none was computed. */
  minus2LL?: number | null;
}

/** Median data-only SD of each subject's random effect k at its conditional mode. */
export function dataOnlySd(model: CompiledModel, density: SubjectDensity, modes: ModeResult, k: number): number | null {
  const d = model.nEta;
  const eta = new Float64Array(d);
  let maxObs = 0;
  for (const s of model.subjects) maxObs = Math.max(maxObs, s.nObs);
  const f = new Float64Array(Math.max(1, maxObs));
  const h = 0.05;
  const sds: number[] = [];
  for (let i = 0; i < model.nSubjects; i++) {
    if (model.subjects[i].nObs === 0) continue;
    const fi = f.subarray(0, model.subjects[i].nObs);
    for (let c = 0; c < d; c++) eta[c] = modes.eta[i * d + c];
    const l0 = density.logLik(i, eta, fi);
    eta[k] += h;
    const lp = density.logLik(i, eta, fi);
    eta[k] -= 2 * h;
    const lm = density.logLik(i, eta, fi);
    const info = -(lp - 2 * l0 + lm) / (h * h);
    sds.push(info > 0 && Number.isFinite(info) ? 1 / Math.sqrt(info) : Infinity);
  }
  if (!sds.length) return null;
  sds.sort((x, y) => x - y);
  const m = sds[(sds.length - 1) >> 1];
  return Number.isFinite(m) ? m : null;
}

export function assessDegeneracy(input: DegeneracyInput): DegeneracyReport {
  const { model, theta } = input;
  const findings: DegeneracyFinding[] = [];
  const d = model.nEta;
  const names = model.parameters.map((q) => q.name);
  const fmt = (x: number) => (Number.isFinite(x) ? Number(x.toPrecision(3)).toString() : String(x));

  for (let k = 0; k < d; k++) {
    const name = names[model.etaParameter[k]];
    const v = theta.omega[k * d + k];
    const sd = Math.sqrt(v);
    if (!Number.isFinite(sd)) {
      findings.push({ code: 'estimate-not-finite', parameter: name, message: `BSV of ${name} is not a finite number (${fmt(sd)})` });
      continue;
    }
    if (model.parameters[model.etaParameter[k]].transform === 'log' && !Number.isFinite(Math.sqrt(Math.expm1(v))))
      findings.push({ code: 'cv-not-finite', parameter: name, message: `BSV of ${name} is ${fmt(sd)} on the log scale: its CV is not a finite number; the model does not describe these data` });
    if (sd < COLLAPSED_BSV_SD) {
      const dataSd = input.density && input.modes ? dataOnlySd(model, input.density, input.modes, k) : null;
      const resolved = dataSd !== null && dataSd < DATA_RESOLUTION;
      findings.push({
        code: 'bsv-collapsed',
        parameter: name,
        dataSd,
        dataShowNoVariability: resolved,
        message: resolved
          ? `BSV of ${name} collapsed towards zero (SD ${fmt(sd)}): a BSV on ${name} is not supported by the data (each subject's levels alone fix its ${name} to about ${(100 * dataSd!).toFixed(0)} % and show no spread between subjects); remove the BSV of ${name} from the model and refit`
          : `BSV of ${name} collapsed towards zero (SD ${fmt(sd)}) but the data cannot tell whether ${name} varies between subjects (${dataSd === null ? 'its information could not be computed' : `each subject's levels alone fix its ${name} only to about ${(100 * dataSd).toFixed(0)} %`}): the collapse may come from the estimator; refit with other seeds, or fix this BSV from other knowledge`,
      });
    }
  }
  for (const b of model.blocks)
    for (let x = 0; x < b.length; x++)
      for (let y = x + 1; y < b.length; y++) {
        const r = theta.omega[b[x] * d + b[y]] / Math.sqrt(theta.omega[b[x] * d + b[x]] * theta.omega[b[y] * d + b[y]]);
        const label = `${names[model.etaParameter[b[x]]]},${names[model.etaParameter[b[y]]]}`;
        if (!Number.isFinite(r)) findings.push({ code: 'estimate-not-finite', parameter: label, message: `correlation ${label} is not a finite number` });
        else if (Math.abs(r) > CORRELATION_BOUND) findings.push({ code: 'estimate-at-bound', parameter: label, message: `correlation ${label} is ${fmt(r)}, at its bound of +-1: the two random effects are not separable in these data; remove the correlation or one BSV` });
      }

  // Typical values and covariate effects: finite and away from the limits of their scale.
  model.parameters.forEach((par, j) => {
    const mu = theta.mu[j];
    if (!Number.isFinite(mu)) findings.push({ code: 'estimate-not-finite', parameter: par.name, message: `typical ${par.name} is not a finite number` });
    else if (!par.fixed && par.transform !== 'none' && Math.abs(mu) > 30)
      findings.push({ code: 'estimate-at-bound', parameter: par.name, message: `typical ${par.name} went to ${par.transform === 'log' ? (mu > 0 ? 'infinity' : 'zero') : mu > 0 ? 'one' : 'zero'} (${fmt(mu)} on the ${par.transform} scale): it is not determined by these data` });
  });
  model.covariateTerms.forEach((t, q) => {
    const c = theta.beta[q];
    if (!Number.isFinite(c)) findings.push({ code: 'estimate-not-finite', parameter: `${names[t.parameterIndex]}~${t.covariate}`, message: `covariate effect ${t.label} is not a finite number` });
    else if (!t.fixed && Math.abs(c) > 20) findings.push({ code: 'estimate-at-bound', parameter: `${names[t.parameterIndex]}~${t.covariate}`, message: `covariate effect ${t.label} is ${fmt(c)}, beyond any plausible size: it is not determined by these data` });
  });

  // Residual error.
  const rm = model.residualModel;
  let medianLevel = 1;
  {
    const ys: number[] = [];
    for (const s of model.subjects) for (let o = 0; o < s.nObs; o++) if (!s.censored[o] && s.y[o] > 0) ys.push(s.y[o]);
    ys.sort((x, y) => x - y);
    if (ys.length) medianLevel = ys[(ys.length - 1) >> 1];
  }
  const aUsed = rm === 'additive' || rm === 'combined' || rm === 'log-additive';
  const bUsed = rm === 'proportional' || rm === 'combined';
  const aSmall = aUsed && !(theta.a > COLLAPSED_RESIDUAL_SHARE * (rm === 'log-additive' ? 1 : medianLevel));
  const bSmall = bUsed && !(theta.b > COLLAPSED_RESIDUAL_SHARE);
  if (aUsed && !Number.isFinite(theta.a)) findings.push({ code: 'estimate-not-finite', parameter: 'a', message: 'residual a is not a finite number' });
  if (bUsed && !Number.isFinite(theta.b)) findings.push({ code: 'estimate-not-finite', parameter: 'b', message: 'residual b is not a finite number' });
  if ((aSmall || !aUsed) && (bSmall || !bUsed))
    findings.push({ code: 'residual-collapsed', parameter: aUsed ? 'a' : 'b', message: `the residual error collapsed to zero (${aUsed ? `a ${fmt(theta.a)}` : ''}${aUsed && bUsed ? ', ' : ''}${bUsed ? `b ${fmt(theta.b)}` : ''}): the model interpolates the levels exactly, so its likelihood and standard errors mean nothing; simplify the model (fewer BSVs) or check the data for duplicated levels` });

  if (input.minus2LL !== undefined && input.minus2LL !== null) {
    if (!Number.isFinite(input.minus2LL)) findings.push({ code: 'minus2ll-not-finite', parameter: '-2LL', message: `-2LL is not a finite number (${fmt(input.minus2LL)}): the likelihood could not be evaluated at the estimates` });
    else if (input.minus2LL < 0 && findings.some((f) => f.code === 'residual-collapsed'))
      findings.push({ code: 'minus2ll-negative', parameter: '-2LL', message: `-2LL is negative (${fmt(input.minus2LL)}) because the residual error collapsed: the likelihood grows without bound and the estimates are not an MLE` });
  } else if (input.minus2LL === null) findings.push({ code: 'minus2ll-not-finite', parameter: '-2LL', message: '-2LL could not be computed at the estimates' });

  return { usableAsPrior: findings.length === 0, findings };
}

/** Lines for the top of the fit summary (empty when nothing was found). */
export function formatDegeneracy(report: DegeneracyReport | undefined): string[] {
  if (!report || report.findings.length === 0) return [];
  return ['NOT FIT FOR USE AS A PRIOR: this fit degenerated:', ...report.findings.map((f) => `  - ${f.message}`), ''];
}
