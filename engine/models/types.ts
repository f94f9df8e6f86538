/**
 * The contract between structural PK models and everything that evaluates them (simulation,
 * the estimator, post-fit diagnostics, dosing). A model is prepared once per subject and
 * output-time grid; the returned predictor is the hot-loop function.
 */
import type { Dose } from '../data/types.js';

export type StructureId = '1cmt' | '2cmt' | '3cmt' | '1cmt-mm';

/** Parameter names the structures use. Absorption parameters apply when the data hold oral doses. */
export type PkParameterName = 'CL' | 'V' | 'V1' | 'Q' | 'V2' | 'Q2' | 'Q3' | 'V3' | 'Vmax' | 'Km' | 'ka' | 'tlag' | 'F';

export type Transform = 'log' | 'logit' | 'none';

export interface ParameterInfo {
  name: PkParameterName;
  unit: string;
  description: string;
  /** Sensible starting value for a fit (typical adult, common practice). */
  defaultInitial: number;
  /** Transforms that respect the parameter's domain; the first is the default. */
  transforms: readonly Transform[];
  /** Value used when the parameter is absent from a model spec (tlag 0, F 1); undefined = required. */
  defaultWhenAbsent?: number;
}

/** Settings for the numerical (ODE) models; ignored by analytic ones. */
export interface SolverSettings {
  relTol: number;
  absTol: number;
  /** Upper bound on the number of accepted+rejected steps per subject evaluation. */
  maxSteps: number;
}

export const DEFAULT_SOLVER_SETTINGS: SolverSettings = { relTol: 1e-8, absTol: 1e-10, maxSteps: 100_000 };

/**
 * Evaluates concentrations (mg/L) at the times given to `prepare`, writing them into `out`
 * (same length, same order as the times). `params` holds the model's full parameter vector in
 * `StructuralModel.parameterOrder` order, on the natural scale. Returns false (and fills `out`
 * with NaN) when the parameters are outside the domain or the solver fails: a numerical failure
 * is data, never an exception in the hot loop. Allocates nothing.
 */
export type Predictor = (params: Float64Array, out: Float64Array) => boolean;

export interface StructuralModel {
  id: StructureId;
  label: string;
  /** Disposition parameters, always required, then ka, tlag, F. */
  parameterOrder: readonly PkParameterName[];
  parameters: readonly ParameterInfo[];
  /** Number of compartments in the disposition part (excluding the absorption depot). */
  compartments: number;
  /** One-line plain-text equation for the UI. */
  equation: string;
  /** Plain-text description of the compartment sketch for the UI. */
  sketch: string;
  /** True for the analytic (closed-form) models; false for the ODE-solved ones. */
  analytic: boolean;
  /**
   * Prepare the predictor for one dosing history and a set of output times (h, any order,
   * duplicates allowed). Doses must be valid (see createDataset); times >= 0.
   */
  prepare(doses: readonly Dose[], timesH: ArrayLike<number>, solver?: Partial<SolverSettings>): Predictor;
}
