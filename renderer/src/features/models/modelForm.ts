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

/**
 * One block of correlated random effects: the parameters whose BSV is estimated with
 * correlations between them, and optional starting (or published) correlations per pair.
 */
export interface CorrelationBlock {
  /** Parameter names, kept in the model's parameter order. */
  parameters: string[];
  /** Correlation per pair "P1,P2" (P1 before P2 in parameter order) as typed; empty: not given (0). */
  values: Record<string, string>;
}

/** Correlations typed in the editor stay within these bounds (the engine accepts (-1, 1)). */
export const CORRELATION_BOUND = 0.95;

export interface ModelForm {
  structure: string;
  name: string;
  parameters: ParameterRow[];
  covariates: CovariateRow[];
  /** Blocks of correlated BSV; parameters in no block are uncorrelated. */
  correlations: CorrelationBlock[];
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
    correlations: [],
    residualModel: 'combined',
    a: '0.5',
    b: '0.1',
    estimation: {},
  };
}

/** The pairs of a block, each in parameter order, with the key correlationValues uses. */
export function correlationPairs(block: CorrelationBlock): { a: string; b: string; key: string }[] {
  const out: { a: string; b: string; key: string }[] = [];
  for (let i = 0; i < block.parameters.length; i++)
    for (let j = i + 1; j < block.parameters.length; j++) out.push({ a: block.parameters[i], b: block.parameters[j], key: `${block.parameters[i]},${block.parameters[j]}` });
  return out;
}

/** Tick or untick a parameter in a block, keeping the model's parameter order. */
export function toggleInBlock(f: ModelForm, blockIndex: number, name: string, on: boolean): void {
  const block = f.correlations[blockIndex];
  if (!block) return;
  const set = new Set(block.parameters);
  if (on) set.add(name);
  else set.delete(name);
  block.parameters = f.parameters.map((p) => p.name).filter((n) => set.has(n));
}

/** A new block: the first two used parameters with BSV that are in no block yet (or none). */
export function newCorrelationBlock(f: ModelForm): CorrelationBlock {
  const taken = new Set(f.correlations.flatMap((b) => b.parameters));
  const free = f.parameters.filter((p) => p.included && p.bsvOn && !taken.has(p.name)).map((p) => p.name);
  return { parameters: free.length >= 2 ? free.slice(0, 2) : [], values: {} };
}

/** Cholesky of a small symmetric matrix; false when it is not positive definite. */
function positiveDefinite(m: number[][]): boolean {
  const n = m.length;
  const l = m.map(() => new Array<number>(n).fill(0));
  for (let i = 0; i < n; i++)
    for (let j = 0; j <= i; j++) {
      let sum = m[i][j];
      for (let k = 0; k < j; k++) sum -= l[i][k] * l[j][k];
      if (i === j) {
        if (!(sum > 1e-10)) return false;
        l[i][i] = Math.sqrt(sum);
      } else l[i][j] = sum / l[j][j];
    }
  return true;
}

/**
 * The correlation blocks as the spec's `correlations` and `correlationValues`, with every
 * problem named by block (and pair). `block` is the 0-based block a problem belongs to.
 */
export function correlationsOf(f: ModelForm): { correlations: string[][]; values: Record<string, number>; problems: { block: number; message: string }[] } {
  const problems: { block: number; message: string }[] = [];
  const correlations: string[][] = [];
  const values: Record<string, number> = {};
  const byName = new Map(f.parameters.map((p) => [p.name, p]));
  const firstBlock = new Map<string, number>();
  const bound = CORRELATION_BOUND.toFixed(2);
  f.correlations.forEach((block, i) => {
    const where = `Correlation block ${i + 1}`;
    let usable = true;
    for (const name of block.parameters) {
      const p = byName.get(name);
      if (!p) {
        problems.push({ block: i, message: `${where}: ${name} is not a parameter of this model; untick it.` });
        usable = false;
      } else if (!p.included) {
        problems.push({ block: i, message: `${where}: ${name} is not used in this model; tick "Use ${name}" above or untick it here.` });
        usable = false;
      } else if (!p.bsvOn) {
        problems.push({ block: i, message: `${where}: ${name} has no between-subject variability (BSV), so it cannot be correlated; tick its BSV box above or untick it here.` });
        usable = false;
      }
      const seen = firstBlock.get(name);
      if (seen !== undefined) {
        problems.push({ block: i, message: `${where}: ${name} is already in correlation block ${seen + 1}; a parameter belongs to one block, so tick all of its partners in one block.` });
        usable = false;
      } else firstBlock.set(name, i);
    }
    if (block.parameters.length < 2) {
      problems.push({ block: i, message: `${where}: tick at least two parameters with BSV, or remove the block.` });
      usable = false;
    }
    const pairs = correlationPairs(block);
    const r = new Map<string, number>();
    for (const pair of pairs) {
      const text = (block.values[pair.key] ?? '').trim();
      if (!text) continue;
      const x = Number(text.replace('−', '-'));
      if (!Number.isFinite(x) || Math.abs(x) > CORRELATION_BOUND) {
        problems.push({ block: i, message: `${where}, ${pair.a} with ${pair.b}: "${text}" is not a correlation from −${bound} to ${bound}.` });
        usable = false;
      } else r.set(pair.key, x);
    }
    if (!usable) return;
    const n = block.parameters.length;
    const m = block.parameters.map((a, ia) => block.parameters.map((b, ib) => (ia === ib ? 1 : (r.get(ia < ib ? `${a},${b}` : `${b},${a}`) ?? 0))));
    if (!positiveDefinite(m)) {
      problems.push({ block: i, message: `${where}: these ${n} correlations cannot hold together (their matrix is not positive definite); make some of them smaller in size.` });
      return;
    }
    correlations.push([...block.parameters]);
    for (const [k, x] of r) values[k] = x;
  });
  return { correlations, values, problems };
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
    const typical = num(p.typical, `${p.name} typical value`, true);
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
  const corr = correlationsOf(f);
  problems.push(...corr.problems.map((p) => p.message));
  const extra: Record<string, unknown> = {};
  if (Object.keys(corr.values).length) extra.correlationValues = corr.values;
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
  return { spec: { name: f.name.trim() || f.structure, structure: f.structure, parameters, covariates, correlations: corr.correlations, residual, estimation, ...extra }, problems };
}
