import type { Advice } from '../../../../engine/dosing/advise.js';
import type { TargetSpec } from '../../../../engine/dosing/targets.js';

export type { Advice, TargetSpec };
export type { LiteratureModel, TargetPreset } from '../../lib/types.js';

/** The prior the advice is computed from. */
export type PriorChoice = { kind: 'fit'; fitId: string } | { kind: 'literature'; id: string } | { kind: 'entered' } | { kind: 'none' };
