/**
 * Concentration curves computed in the renderer with the engine's structural models: a
 * subject's curve at given parameter values (individual fits, model overlays at initial values).
 */
import type { Subject } from '../../../../engine/data/types.js';
import { structuralModelWithSolver } from '../../../../engine/models/catalogue.js';
import type { PkParameterName } from '../../../../engine/models/types.js';
import type { ModelSpec } from '../../../../engine/spec/modelSpec.js';
import { toModelVector, typicalIndividualParameters } from '../../../../engine/spec/individual.js';

export interface Curve {
  t: number[];
  y: number[];
}

/** An even grid over the subject's events (first dose to 1.3 x the last event, at least 24 h). */
export function timeGrid(subject: Subject, n = 120): number[] {
  const last = Math.max(...subject.doses.map((d) => d.timeH + d.durationH), ...subject.observations.map((o) => o.timeH), 0);
  const end = Math.max(24, last * 1.15 + 2);
  return Array.from({ length: n + 1 }, (_, i) => (end * i) / n);
}

/** The curve at the given natural-scale parameter values; NaN where the model cannot evaluate. */
export function curveAt(spec: Pick<ModelSpec, 'structure' | 'solver'>, subject: Subject, values: Partial<Record<string, number | null>>, times: number[]): Curve {
  const model = structuralModelWithSolver(spec.structure, spec.solver);
  const clean: Partial<Record<PkParameterName, number>> = {};
  for (const p of model.parameters) {
    const v = values[p.name];
    clean[p.name] = typeof v === 'number' ? v : (p.defaultWhenAbsent ?? NaN);
  }
  const out = new Float64Array(times.length);
  if (subject.doses.length === 0) return { t: times, y: Array.from(out) };
  const predict = model.prepare(subject.doses, times);
  predict(toModelVector(model, clean), out);
  return { t: times, y: Array.from(out) };
}

/** The typical (population) curve of a spec for this subject's covariates. */
export function typicalCurve(spec: ModelSpec, subject: Subject, times: number[]): Curve {
  const values = typicalIndividualParameters(spec, subject.covariates, subject.id);
  return curveAt(spec, subject, values, times);
}

/** The spec with a fit's population estimates in place of its initial values. */
export function specWithEstimates(spec: ModelSpec, population: ReadonlyArray<{ parameter: string; kind: string; covariate?: string; estimate: number }>): ModelSpec {
  const out: ModelSpec = JSON.parse(JSON.stringify(spec));
  for (const e of population) {
    if (e.kind === 'typical') {
      const p = out.parameters[e.parameter as PkParameterName];
      if (p) p.typical = e.estimate;
    } else if (e.kind === 'covariate' && e.covariate) {
      const [cov, level] = e.covariate.split('=');
      const c = out.covariates.find((x) => x.parameter === e.parameter && x.covariate === cov);
      if (!c) continue;
      if (level !== undefined) c.coefficients = { ...(c.coefficients ?? {}), [level]: e.estimate };
      else c.coefficient = e.estimate;
    }
  }
  return out;
}
