/** Units of the figures in dose advice, for advice.json's `units` and the printed tables. */
import type { ModelSpec } from '../spec/modelSpec.js';

/** Parameter units (L/h for clearances, L for volumes, 1/h for ka, h for tlag, mg/h for Vmax). */
export function parameterUnit(name: string): string {
  if (/^(CL|Q\d?)$/.test(name)) return 'L/h';
  if (/^V\d?$/.test(name)) return 'L';
  if (name === 'ka') return '1/h';
  if (name === 'tlag') return 'h';
  if (name === 'F') return 'fraction';
  if (name === 'Vmax') return 'mg/h';
  if (name === 'Km') return 'mg/L';
  return '';
}

/** Units of the advice record's fields, by field name. */
export const UNITS: Record<string, string> = {
  timeH: 'h from the first dose',
  clock: 'ward clock, local time',
  amountMg: 'mg',
  doseMg: 'mg',
  loadingDoseMg: 'mg',
  dailyDoseMg: 'mg per 24 h',
  intervalH: 'h',
  durationH: 'h',
  concMgL: 'mg/L',
  lloqMgL: 'mg/L',
  auc24: 'mg.h/L',
  auc: 'mg.h/L',
  trough: 'mg/L',
  peak: 'mg/L',
  peakAt: 'mg/L',
  ftAbove: '% of the interval',
  levelAtNextDose: 'mg/L',
  highest: 'mg/L',
  thresholdMgL: 'mg/L',
  hours: 'h',
  pTarget: 'probability (0-1)',
  pToxic: 'probability (0-1)',
};


/**
 * The population values of a model in words with units: typical values, BSV (SD of the random
 * effect on the transformed scale), covariate effects named by their relation, residual error.
 */
export function describeModelValues(spec: ModelSpec): string[] {
  const out: string[] = [];
  const n = (x: number) => String(Number(x.toPrecision(4)));
  for (const [name, p] of Object.entries(spec.parameters)) {
    if (!p) continue;
    const unit = parameterUnit(name);
    out.push(`${name} typical ${n(p.typical)}${unit ? ` ${unit}` : ''}${p.bsv !== null ? `, BSV ${n(p.bsv)} (SD on the ${p.transform} scale)` : ', no BSV'}`);
  }
  for (const c of spec.covariates) {
    if (c.relation === 'power') out.push(`${c.parameter}: power exponent ${n(c.coefficient ?? 0)} on ${c.covariate} (${c.parameter} x (${c.covariate} / ${c.reference})^${n(c.coefficient ?? 0)})`);
    else if (c.relation === 'linear') out.push(`${c.parameter}: linear coefficient ${n(c.coefficient ?? 0)} per unit of ${c.covariate} on the transformed scale (reference ${c.reference})`);
    else
      out.push(`${c.parameter}: categorical shifts on ${c.covariate} (reference ${c.reference}): ${Object.entries(c.coefficients ?? {}).map(([k, v]) => `${k} ${n(v)} on the transformed scale${spec.parameters[c.parameter]?.transform === 'log' ? ` (x${n(Math.exp(v))})` : ''}`).join(', ')}`);
  }
  const r = spec.residual;
  const parts: string[] = [];
  if (r.a !== undefined) parts.push(r.model === 'log-additive' ? `a ${n(r.a)} (SD on the log scale)` : `a ${n(r.a)} mg/L (additive SD)`);
  if (r.b !== undefined) parts.push(`b ${n(r.b)} (proportional, fraction of the prediction)`);
  out.push(`residual error ${r.model}: ${parts.join(', ')}`);
  return out;
}
