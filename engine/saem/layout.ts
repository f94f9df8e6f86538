/**
 * The estimator's parameter layout, described once: the order of the estimates (trajectory
 * columns, progress callback, fit record), their natural-scale values from theta, their working
 * scale for the settle test, and the components moved by the numerical step (typical values and
 * covariate effects of parameters without BSV, combined-error log a and log b) with their
 * read and write.
 *
 * Estimate order: typical values (natural scale, spec order), covariate coefficients (term
 * order), BSV SDs (random-effect order), correlations within each Omega block (row-major upper
 * triangle), residual terms (additive or log-scale SD, then proportional SD).
 */
import type { CompiledModel, PopulationParameters } from '../stats/model.js';

/**
 * Trajectory columns of the residual terms, named by what they are (the spec's residual keys
 * are `a` and `b`: additive SD in mg/L, or the SD on the log scale for log-additive error, and
 * the proportional SD).
 */
export const RESIDUAL_COLUMN = Object.freeze({ additive: 'residual_additive_mg_L', logScale: 'residual_log_sd', proportional: 'residual_proportional' });

/** The spec key (`a` or `b`) of a residual trajectory column, or null for other columns. */
export function residualKeyOf(column: string): 'a' | 'b' | null {
  return column === RESIDUAL_COLUMN.proportional ? 'b' : column === RESIDUAL_COLUMN.additive || column === RESIDUAL_COLUMN.logScale ? 'a' : null;
}

/** Names of the estimates in the trajectory (and the progress callback), in order. */
export function estimateNamesOf(model: CompiledModel): string[] {
  const names: string[] = model.parameters.map((p) => p.name);
  for (const t of model.covariateTerms) names.push(t.label);
  for (let k = 0; k < model.nEta; k++) names.push(`bsv_${model.parameters[model.etaParameter[k]].name}`);
  for (const b of model.blocks)
    for (let x = 0; x < b.length; x++)
      for (let y = x + 1; y < b.length; y++) names.push(`corr_${model.parameters[model.etaParameter[b[x]]].name},${model.parameters[model.etaParameter[b[y]]].name}`);
  const rm = model.residualModel;
  if (rm === 'additive' || rm === 'combined') names.push(RESIDUAL_COLUMN.additive);
  if (rm === 'log-additive') names.push(RESIDUAL_COLUMN.logScale);
  if (rm === 'proportional' || rm === 'combined') names.push(RESIDUAL_COLUMN.proportional);
  return names;
}

/** The estimates of theta in the layout's order into `out`. */
export function writeEstimates(model: CompiledModel, theta: PopulationParameters, out: Float64Array): void {
  const p = model.nParams;
  const nEta = model.nEta;
  const rm = model.residualModel;
  let q = 0;
  for (let j = 0; j < p; j++) out[q++] = model.parameters[j].transform === 'log' ? Math.exp(theta.mu[j]) : model.parameters[j].transform === 'logit' ? 1 / (1 + Math.exp(-theta.mu[j])) : theta.mu[j];
  for (let t = 0; t < model.covariateTerms.length; t++) out[q++] = theta.beta[t];
  for (let k = 0; k < nEta; k++) out[q++] = Math.sqrt(theta.omega[k * nEta + k]);
  for (const b of model.blocks)
    for (let x = 0; x < b.length; x++)
      for (let y = x + 1; y < b.length; y++) out[q++] = theta.omega[b[x] * nEta + b[y]] / Math.sqrt(theta.omega[b[x] * nEta + b[x]] * theta.omega[b[y] * nEta + b[y]]);
  if (rm === 'additive' || rm === 'combined' || rm === 'log-additive') out[q++] = theta.a;
  if (rm === 'proportional' || rm === 'combined') out[q++] = theta.b;
}

/** 1 where an estimate is judged on the log scale by the settle test (positive quantities). */
export function positiveEstimates(model: CompiledModel, names: readonly string[]): Uint8Array {
  const positive = new Uint8Array(names.length);
  let q = 0;
  for (let j = 0; j < model.nParams; j++) positive[q++] = model.parameters[j].transform === 'log' ? 1 : 0;
  q += model.covariateTerms.length;
  for (let k = 0; k < model.nEta; k++) positive[q++] = 1;
  for (; q < names.length; q++) positive[q] = residualKeyOf(names[q]) !== null ? 1 : 0;
  return positive;
}

/** A component of the numerical step: a typical value (mu), a covariate effect (beta), log a or log b. */
export interface NumericalComponent {
  kind: 'mu' | 'beta' | 'loga' | 'logb';
  index: number;
}

/**
 * The numerical block: estimated typical values and covariate effects of parameters without BSV,
 * then (combined error only) log a and log b. `structural` is true when the block moves
 * predictions (it holds a typical value or a covariate effect).
 */
export function numericalComponents(model: CompiledModel): { components: NumericalComponent[]; structural: boolean } {
  const components: NumericalComponent[] = [];
  const hasEta = (j: number) => model.parameters[j].etaIndex >= 0;
  for (let j = 0; j < model.nParams; j++) if (!hasEta(j) && !model.parameters[j].fixed) components.push({ kind: 'mu', index: j });
  model.covariateTerms.forEach((t, q) => {
    if (!hasEta(t.parameterIndex) && !t.fixed) components.push({ kind: 'beta', index: q });
  });
  const structural = components.length > 0;
  if (model.residualModel === 'combined') components.push({ kind: 'loga', index: 0 }, { kind: 'logb', index: 0 });
  return { components, structural };
}

/** The numerical block's current values (working scale: log a, log b). */
export function readNumerical(components: readonly NumericalComponent[], theta: PopulationParameters, out: Float64Array, offset = 0): void {
  for (let m = 0; m < components.length; m++) {
    const nc = components[m];
    out[offset + m] = nc.kind === 'mu' ? theta.mu[nc.index] : nc.kind === 'beta' ? theta.beta[nc.index] : nc.kind === 'loga' ? Math.log(theta.a) : Math.log(theta.b);
  }
}

/** Set one component of the numerical block from its working-scale value. */
export function writeNumerical(nc: NumericalComponent, value: number, theta: PopulationParameters): void {
  if (nc.kind === 'mu') theta.mu[nc.index] = value;
  else if (nc.kind === 'beta') theta.beta[nc.index] = value;
  else if (nc.kind === 'loga') theta.a = Math.exp(value);
  else theta.b = Math.exp(value);
}
