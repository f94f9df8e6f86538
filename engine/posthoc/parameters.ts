/**
 * The population parameters as one vector, in the order of the fit record's `population` list
 * (typical values, covariate coefficients, BSV SDs, correlations, residual a then b), on the
 * natural scale of the record and on a working scale where the information matrix is computed:
 * typical values on their transform's scale (mu), coefficients as they are, BSV SDs and residual
 * terms on the log scale, correlations by Fisher's z = atanh(r). The delta method maps SEs back
 * (SE_natural = |d natural / d working| SE_working).
 */
import type { CompiledModel, PopulationParameters } from '../stats/model.js';

export type WorkingKind = 'typical' | 'covariate' | 'bsv' | 'correlation' | 'residual';

export interface WorkingEntry {
  kind: WorkingKind;
  /** Index: parameter (typical), covariate term, eta (bsv), 0 = a / 1 = b (residual). */
  index: number;
  /** Correlations: the two eta indices. */
  pair?: [number, number];
  label: string;
  fixed: boolean;
  /** Name of the working scale, for the report. */
  scale: 'log' | 'logit' | 'identity' | 'atanh';
}

export interface ParameterLayout {
  entries: readonly WorkingEntry[];
  /** Positions of the estimated (not fixed) entries. */
  estimated: Int32Array;
}

export function parameterLayout(model: CompiledModel): ParameterLayout {
  const entries: WorkingEntry[] = [];
  model.parameters.forEach((p, j) =>
    entries.push({ kind: 'typical', index: j, label: `${p.name} (typical)`, fixed: p.fixed, scale: p.transform === 'log' ? 'log' : p.transform === 'logit' ? 'logit' : 'identity' }),
  );
  model.covariateTerms.forEach((t, ti) => entries.push({ kind: 'covariate', index: ti, label: t.label, fixed: t.fixed, scale: 'identity' }));
  for (let k = 0; k < model.nEta; k++) entries.push({ kind: 'bsv', index: k, label: `BSV ${model.parameters[model.etaParameter[k]].name} (omega)`, fixed: false, scale: 'log' });
  for (const b of model.blocks)
    for (let x = 0; x < b.length; x++)
      for (let y = x + 1; y < b.length; y++)
        entries.push({
          kind: 'correlation',
          index: 0,
          pair: [b[x], b[y]],
          label: `correlation ${model.parameters[model.etaParameter[b[x]]].name},${model.parameters[model.etaParameter[b[y]]].name}`,
          fixed: false,
          scale: 'atanh',
        });
  const rm = model.residualModel;
  if (rm === 'additive' || rm === 'combined' || rm === 'log-additive') entries.push({ kind: 'residual', index: 0, label: 'residual a', fixed: false, scale: 'log' });
  if (rm === 'proportional' || rm === 'combined') entries.push({ kind: 'residual', index: 1, label: 'residual b', fixed: false, scale: 'log' });
  const estimated = Int32Array.from(entries.flatMap((e, q) => (e.fixed ? [] : [q])));
  return { entries, estimated };
}

/** Working-scale vector of theta (all entries, fixed ones included). */
export function toWorking(model: CompiledModel, layout: ParameterLayout, theta: PopulationParameters): Float64Array {
  const n = model.nEta;
  return Float64Array.from(layout.entries, (e) => {
    switch (e.kind) {
      case 'typical':
        return theta.mu[e.index];
      case 'covariate':
        return theta.beta[e.index];
      case 'bsv':
        return 0.5 * Math.log(theta.omega[e.index * n + e.index]);
      case 'correlation': {
        const [x, y] = e.pair!;
        const r = theta.omega[x * n + y] / Math.sqrt(theta.omega[x * n + x] * theta.omega[y * n + y]);
        return Math.atanh(r);
      }
      case 'residual':
        return Math.log(e.index === 0 ? theta.a : theta.b);
    }
  });
}

/** theta from a working vector (Omega assembled within its blocks). */
export function fromWorking(model: CompiledModel, layout: ParameterLayout, w: ArrayLike<number>, out?: PopulationParameters): PopulationParameters {
  const n = model.nEta;
  const theta = out ?? { mu: new Float64Array(model.nParams), beta: new Float64Array(model.covariateTerms.length), omega: new Float64Array(n * n), a: 0, b: 0 };
  theta.omega.fill(0);
  const sd = new Float64Array(n);
  layout.entries.forEach((e, q) => {
    if (e.kind === 'bsv') sd[e.index] = Math.exp(w[q]);
  });
  layout.entries.forEach((e, q) => {
    const v = w[q];
    if (e.kind === 'typical') theta.mu[e.index] = v;
    else if (e.kind === 'covariate') theta.beta[e.index] = v;
    else if (e.kind === 'bsv') theta.omega[e.index * n + e.index] = sd[e.index] * sd[e.index];
    else if (e.kind === 'correlation') {
      const [x, y] = e.pair!;
      const c = Math.tanh(v) * sd[x] * sd[y];
      theta.omega[x * n + y] = theta.omega[y * n + x] = c;
    } else if (e.index === 0) theta.a = Math.exp(v);
    else theta.b = Math.exp(v);
  });
  return theta;
}

/** Natural-scale value (as in the fit record) and d natural / d working for entry q at working value w. */
export function naturalOf(model: CompiledModel, e: WorkingEntry, w: number): { value: number; derivative: number } {
  if (e.kind === 'typical') {
    const t = model.parameters[e.index].transform;
    if (t === 'log') return { value: Math.exp(w), derivative: Math.exp(w) };
    if (t === 'logit') {
      const p = 1 / (1 + Math.exp(-w));
      return { value: p, derivative: p * (1 - p) };
    }
    return { value: w, derivative: 1 };
  }
  if (e.kind === 'covariate') return { value: w, derivative: 1 };
  if (e.kind === 'correlation') {
    const r = Math.tanh(w);
    return { value: r, derivative: 1 - r * r };
  }
  return { value: Math.exp(w), derivative: Math.exp(w) };
}

export function copyTheta(theta: PopulationParameters): PopulationParameters {
  return { mu: Float64Array.from(theta.mu), beta: Float64Array.from(theta.beta), omega: Float64Array.from(theta.omega), a: theta.a, b: theta.b };
}

/** One population entry as the fit record stores it. */
export interface PopulationEntryLike {
  parameter: string;
  kind: string;
  covariate?: string;
  estimate: number;
}

/**
 * theta from the fit record's population list (natural scale: typical values, BSV SDs,
 * correlations, residual terms), in the record's order. Throws naming the entry when the list
 * does not match the model.
 */
export function thetaFromPopulation(model: CompiledModel, population: readonly PopulationEntryLike[]): PopulationParameters {
  const layout = parameterLayout(model);
  if (population.length !== layout.entries.length)
    throw new Error(`the fit record lists ${population.length} population estimates but the model has ${layout.entries.length}; refit with this model`);
  const w = new Float64Array(layout.entries.length);
  layout.entries.forEach((e, q) => {
    const rec = population[q];
    const v = rec.estimate;
    if (rec.kind !== (e.kind === 'residual' ? 'residual' : e.kind) || !Number.isFinite(v))
      throw new Error(`population[${q}] (${rec.kind} ${rec.parameter}) does not match the model's ${e.label} or is not a finite number`);
    if (e.kind === 'typical') {
      const t = model.parameters[e.index].transform;
      w[q] = t === 'log' ? Math.log(v) : t === 'logit' ? Math.log(v / (1 - v)) : v;
    } else if (e.kind === 'covariate') w[q] = v;
    else if (e.kind === 'correlation') w[q] = Math.atanh(v);
    else w[q] = Math.log(v);
  });
  return fromWorking(model, layout, w);
}
