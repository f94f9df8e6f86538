/** Check kinds by the `kind` of suite.json. */
import type { CheckKind } from './common.js';
import { dosingGrid, dosingMap } from './dosing.js';
import { importWorkbook } from './importCheck.js';
import { lmmFit } from './lmm.js';
import { modelCurves, steadyStateMetrics } from './models.js';
import { reproducibleFit } from './reproducibility.js';
import { theophFit, theophFitPosthoc, theophLikelihood, theophModes, theophSe } from './theoph.js';

export const CHECK_KINDS: ReadonlyMap<string, CheckKind> = new Map<string, CheckKind>([
  ['model-curves', modelCurves],
  ['steady-state-metrics', steadyStateMetrics],
  ['theoph-fit', theophFit],
  ['theoph-likelihood', theophLikelihood],
  ['theoph-se', theophSe],
  ['theoph-modes', theophModes],
  ['theoph-fit-posthoc', theophFitPosthoc],
  ['dosing-map', dosingMap],
  ['dosing-grid', dosingGrid],
  ['lmm-fit', lmmFit],
  ['import-workbook', importWorkbook],
  ['reproducible-fit', reproducibleFit],
]);
