/** Check kinds by the `kind` of suite.json. */
import type { CheckKind } from './common.js';
import { dosingGrid, dosingMap } from './dosing.js';
import { importWorkbook } from './importCheck.js';
import { lmmFit } from './lmm.js';
import { modelCurves, steadyStateMetrics } from './models.js';
import { fitLikelihoodSe, likelihoodAtReference, modesAtReference, populationFit, seAtReference } from './populationFit.js';
import { reproducibleFit } from './reproducibility.js';

export const CHECK_KINDS: ReadonlyMap<string, CheckKind> = new Map<string, CheckKind>([
  ['model-curves', modelCurves],
  ['steady-state-metrics', steadyStateMetrics],
  ['population-fit', populationFit],
  ['lmm-fit', lmmFit],
  ['likelihood-at-reference', likelihoodAtReference],
  ['se-at-reference', seAtReference],
  ['modes-at-reference', modesAtReference],
  ['fit-likelihood-se', fitLikelihoodSe],
  ['dosing-map', dosingMap],
  ['dosing-grid', dosingGrid],
  ['import-workbook', importWorkbook],
  ['reproducible-fit', reproducibleFit],
]);
