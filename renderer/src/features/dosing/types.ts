import type { Advice } from '../../../../engine/dosing/advise.js';
import type { TargetSpec } from '../../../../engine/dosing/targets.js';

export type { Advice, TargetSpec };

/** A literature model offered as a prior (resources/models), with its provenance. */
export interface LiteratureModel {
  id: string;
  name: string;
  source?: string;
  /** The model spec JSON (engine/spec). */
  spec: Record<string, unknown>;
  covariateRanges?: Record<string, [number, number]>;
}

/** The prior the advice is computed from. */
export type PriorChoice = { kind: 'fit'; fitId: string } | { kind: 'literature'; id: string } | { kind: 'none' };
