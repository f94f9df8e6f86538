/**
 * What-if regimens redrawn at once, in the renderer: the engine rebuilds this patient's
 * posterior draws exactly as the dose service did (same population model, patient and seed give
 * the same draws), then each edited regimen is a forecast over those draws, a few milliseconds.
 */
import type { CovariateValue } from '../../../../engine/data/types.js';
import { forecast, type Forecast } from '../../../../engine/dosing/forecast.js';
import type { Regimen } from '../../../../engine/dosing/metrics.js';
import { parsePatient, patientCovariate, type Patient } from '../../../../engine/dosing/patient.js';
import { populationModelFromFit, populationModelFromSpec, type PopulationModel } from '../../../../engine/dosing/population.js';
import { buildLevelObjective, drawPrior, findMap, postFitDraws, samplePosterior, DEFAULT_SAMPLER } from '../../../../engine/dosing/posterior.js';
import { buildPatientPrior, type PatientPrior } from '../../../../engine/dosing/prior.js';
import { structuralModelWithSolver } from '../../../../engine/models/catalogue.js';
import { createStreams } from '../../../../engine/rng/index.js';
import { parseModelSpec } from '../../../../engine/spec/modelSpec.js';

export interface WhatIfContext {
  prior: PatientPrior;
  patient: Patient;
  etaDraws: Float64Array;
  nDraws: number;
  nextDoseH: number;
}

/** The population model from a fit record or a model spec (JSON as the bridge returns them). */
export function populationFrom(source: { fit: unknown } | { spec: unknown }): PopulationModel {
  if ('fit' in source) return populationModelFromFit(source.fit as Record<string, unknown>);
  return populationModelFromSpec(parseModelSpec(source.spec));
}

/**
 * The patient's posterior draws, as adviseDose draws them (same covariate resolution, same
 * named random streams), so the renderer's curves are the service's curves.
 */
export function buildWhatIfContext(population: PopulationModel, patientJson: unknown, seed: number, nextDoseH: number): WhatIfContext {
  const patient = parsePatient(patientJson);
  const model = structuralModelWithSolver(population.spec.structure, population.spec.solver);
  const covValues = new Map<string, CovariateValue>();
  for (const name of new Set(population.spec.covariates.map((c) => c.covariate))) {
    const v = patientCovariate(patient, name);
    if (v) covValues.set(name, v.value);
  }
  for (const name of Object.keys(population.covariateRanges ?? {})) {
    if (covValues.has(name)) continue;
    const v = patientCovariate(patient, name);
    if (v) covValues.set(name, v.value);
  }
  const prior = buildPatientPrior(population, covValues, model);
  const root = createStreams(seed);
  const obj = buildLevelObjective(prior, patient.doses, patient.levels);
  const map = findMap(obj, prior);
  const postFit = postFitDraws(population, patient.id, patient.levels, prior);
  const draws =
    postFit ?? (obj.nLevels === 0 ? drawPrior(prior, root.stream('dosing', 'prior-draws'), DEFAULT_SAMPLER.nDraws) : samplePosterior(obj, prior, map, root.stream('dosing', 'posterior'), { nDraws: DEFAULT_SAMPLER.nDraws }));
  return { prior, patient, etaDraws: draws.eta, nDraws: draws.nDraws, nextDoseH };
}

/** The forecast of one regimen from the next dose time over the context's draws. */
export function whatIfForecast(ctx: WhatIfContext, regimen: Regimen): Forecast {
  return forecast({ prior: ctx.prior, history: ctx.patient.doses, etaDraws: ctx.etaDraws, nDraws: ctx.nDraws, regimen, startH: ctx.nextDoseH });
}
