/**
 * The estimates table of a fit record: one row per population entry with its label, unit,
 * estimate, SE and RSE %, and for BSV the SD on the transformed scale, the CV % (log-normal) and
 * the shrinkage. Pure, so the table is tested without a browser.
 */
import { covariateLabel } from '../../lib/format/covariates.js';
import { cvFromLogSd } from '../../lib/format/numbers.js';

export interface EstimateRow {
  label: string;
  unit: string;
  kind: string;
  estimate: number;
  fixed: boolean;
  se: number | null;
  rsePercent: number | null;
  /** BSV only. */
  cvPercent: number | null;
  shrinkagePercent: number | null;
}

const UNITS: Record<string, string> = { CL: 'L/h', V: 'L', V1: 'L', V2: 'L', V3: 'L', Q: 'L/h', Q2: 'L/h', Q3: 'L/h', Vmax: 'mg/h', Km: 'mg/L', ka: '1/h', tlag: 'h', F: '' };

export interface RecordLike {
  spec: { parameters: Record<string, { transform?: string } | undefined>; residual: { model: string } };
  population: Array<{ parameter: string; kind: string; covariate?: string; estimate: number; fixed: boolean; se?: number | null; rsePercent?: number | null }>;
  shrinkage?: { eta: Record<string, { sd: number | null } | undefined> };
}

export function estimateRows(r: RecordLike): EstimateRow[] {
  return r.population.map((e) => {
    let label = e.parameter;
    let unit = '';
    let cv: number | null = null;
    let shrink: number | null = null;
    if (e.kind === 'typical') {
      label = `${e.parameter} (typical value)`;
      unit = UNITS[e.parameter] ?? '';
    } else if (e.kind === 'bsv') {
      label = `BSV of ${e.parameter} (SD, ${r.spec.parameters[e.parameter]?.transform ?? 'log'} scale)`;
      if ((r.spec.parameters[e.parameter]?.transform ?? 'log') === 'log') cv = cvFromLogSd(e.estimate);
      const s = r.shrinkage?.eta[e.parameter]?.sd;
      shrink = s === null || s === undefined ? null : 100 * s;
    } else if (e.kind === 'correlation') label = `correlation of ${e.parameter.replace(',', ' and ')}`;
    else if (e.kind === 'covariate') label = `${e.parameter}: effect of ${covariateEffectLabel(e.covariate)}`;
    else if (e.kind === 'residual') {
      if (e.parameter === 'b') label = 'residual, proportional (fraction)';
      else if (r.spec.residual.model === 'log-additive') label = 'residual, SD on the log scale';
      else {
        label = 'residual, additive SD';
        unit = 'mg/L';
      }
    }
    return { label, unit, kind: e.kind, estimate: e.estimate, fixed: e.fixed, se: e.se ?? null, rsePercent: e.rsePercent ?? null, cvPercent: cv, shrinkagePercent: shrink };
  });
}

/** "crcl_mL_min" -> "creatinine clearance (mL/min)"; a categorical level stays: "sex=F". */
function covariateEffectLabel(covariate: string | undefined): string {
  if (covariate === undefined) return '';
  const [key, level] = covariate.split('=');
  return level === undefined ? covariateLabel(key) : `${covariateLabel(key)} = ${level}`;
}
