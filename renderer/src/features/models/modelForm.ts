/**
 * The model editor as plain data and its conversion to a model spec (engine/spec). The spec is
 * checked by the engine's own parser before it is saved, so the editor and the CLI share one rule.
 */
import type { CatalogueEntry } from '../../lib/types.js';

export interface ParameterRow {
  name: string;
  unit: string;
  description: string;
  /** Absorption parameters are optional (only for oral doses). */
  optional: boolean;
  included: boolean;
  typical: string;
  transform: string;
  transforms: string[];
  bsvOn: boolean;
  bsv: string;
  fixed: boolean;
}

export interface CovariateRow {
  parameter: string;
  covariate: string;
  relation: 'power' | 'linear' | 'categorical';
  /** Continuous: the reference value; categorical: the reference level (no shift). */
  reference: string;
  /** Continuous: one number; categorical: "level: shift" pairs, e.g. "F: -0.2; X: 0.1". */
  coefficient: string;
  fixed: boolean;
}

export interface ModelForm {
  structure: string;
  name: string;
  parameters: ParameterRow[];
  covariates: CovariateRow[];
  residualModel: 'additive' | 'proportional' | 'combined' | 'log-additive';
  a: string;
  b: string;
  /** Estimation settings left empty take the defaults (shown beside each). */
  estimation: Record<string, string>;
  /** A literature model's publication (required when present: dose advice shows it). */
  source?: string;
  /** Covariate ranges of the population the model was built on (dose advice checks the patient against them). */
  ranges?: Array<{ covariate: string; min: string; max: string }>;
}

const ABSORPTION = new Set(['ka', 'tlag', 'F']);

export function formFor(entry: CatalogueEntry): ModelForm {
  return {
    structure: entry.id,
    name: `${entry.label}`,
    parameters: entry.parameters.map((p) => ({
      name: p.name,
      unit: p.unit,
      description: p.description,
      optional: ABSORPTION.has(p.name),
      included: !ABSORPTION.has(p.name),
      typical: String(p.defaultInitial),
      transform: p.transforms[0] ?? 'log',
      transforms: p.transforms,
      bsvOn: !ABSORPTION.has(p.name),
      bsv: '0.3',
      fixed: false,
    })),
    covariates: [],
    residualModel: 'combined',
    a: '0.5',
    b: '0.1',
    estimation: {},
  };
}

/** The spec JSON and the problems that stop it (numbers that are not numbers, named by field). */
export function formToSpec(f: ModelForm): { spec?: Record<string, unknown>; problems: string[] } {
  const problems: string[] = [];
  const num = (text: string, where: string, positive = false): number | undefined => {
    const x = Number(text.trim());
    if (!text.trim() || !Number.isFinite(x) || (positive && !(x > 0))) {
      problems.push(`${where}: "${text}" is not ${positive ? 'a number above 0' : 'a number'}.`);
      return undefined;
    }
    return x;
  };
  const parameters: Record<string, unknown> = {};
  for (const p of f.parameters) {
    if (!p.included) continue;
    const typical = num(p.typical, `${p.name} initial value`, true);
    const bsv = p.bsvOn ? num(p.bsv, `${p.name} BSV`, true) : null;
    parameters[p.name] = { typical, transform: p.transform, bsv: bsv ?? null, fixed: p.fixed };
  }
  const covariates = f.covariates.map((c, i) => {
    const where = `Covariate effect ${i + 1}`;
    if (!c.covariate.trim()) problems.push(`${where}: choose the covariate.`);
    if (c.relation === 'categorical') {
      if (!c.reference.trim()) problems.push(`${where}: give the reference level (the category with no shift, e.g. M).`);
      const coefficients: Record<string, number> = Object.create(null);
      for (const part of c.coefficient.split(/[;\n]/).map((x) => x.trim()).filter(Boolean)) {
        const m = /^(.+?)\s*[:=]\s*(\S+)$/.exec(part);
        const x = m ? Number(m[2]) : NaN;
        if (!m || !Number.isFinite(x)) problems.push(`${where}: "${part}" is not "level: shift" (e.g. F: -0.2).`);
        else coefficients[m[1].trim()] = x;
      }
      if (!Object.keys(coefficients).length) problems.push(`${where}: give a shift for each other level, e.g. "F: -0.2".`);
      return { parameter: c.parameter, covariate: c.covariate.trim(), relation: c.relation, reference: c.reference.trim(), coefficients, fixed: c.fixed };
    }
    return { parameter: c.parameter, covariate: c.covariate.trim(), relation: c.relation, reference: num(c.reference, `${where} reference`), coefficient: num(c.coefficient, `${where} coefficient`), fixed: c.fixed };
  });
  const residual: Record<string, unknown> = { model: f.residualModel };
  if (f.residualModel !== 'proportional') residual.a = num(f.a, 'Residual a', true);
  if (f.residualModel === 'proportional' || f.residualModel === 'combined') residual.b = num(f.b, 'Residual b', true);
  const estimation: Record<string, unknown> = {};
  for (const [k, v] of Object.entries(f.estimation)) {
    if (!v.trim()) continue;
    if (k === 'chains' && v.trim() === 'auto') estimation[k] = 'auto';
    else {
      const x = num(v, `Estimation ${k}`);
      if (x !== undefined) estimation[k] = x;
    }
  }
  const extra: Record<string, unknown> = {};
  if (f.source !== undefined) {
    if (!f.source.trim()) problems.push('Source: give the publication the values come from (authors, journal, year) and its population.');
    else extra.source = f.source.trim();
  }
  if (f.ranges?.length) {
    const ranges: Record<string, [number, number]> = Object.create(null);
    f.ranges.forEach((r, i) => {
      const lo = num(r.min, `Covariate range ${i + 1} minimum`);
      const hi = num(r.max, `Covariate range ${i + 1} maximum`);
      if (!r.covariate.trim()) problems.push(`Covariate range ${i + 1}: name the covariate (e.g. weight_kg).`);
      else if (lo !== undefined && hi !== undefined) {
        if (lo > hi) problems.push(`Covariate range ${i + 1}: the minimum ${lo} is above the maximum ${hi}.`);
        ranges[r.covariate.trim()] = [lo, hi];
      }
    });
    extra.covariateRanges = ranges;
  }
  if (problems.length) return { problems };
  return { spec: { name: f.name.trim() || f.structure, structure: f.structure, parameters, covariates, correlations: [], residual, estimation, ...extra }, problems };
}
