/**
 * A linear "structural model" for reference checks of the estimator through the same generic
 * Predictor interface: prediction = b0 + b1 (t - centre), linear in the parameters, identity
 * transforms. With it, the population model is a linear mixed model with an exact ML solution.
 * Used by the verification suite and by the tests.
 */
import type { PkParameterName, StructuralModel } from '../../../engine/models/types.js';

export function linearModel(centre = 0): StructuralModel {
  return {
    id: '1cmt',
    label: `linear in time, centred at ${centre}`,
    parameterOrder: ['b0', 'b1'] as unknown as PkParameterName[],
    parameters: [
      { name: 'b0' as PkParameterName, unit: '', description: 'intercept', defaultInitial: 0, transforms: ['none'] },
      { name: 'b1' as PkParameterName, unit: '', description: 'slope', defaultInitial: 0, transforms: ['none'] },
    ],
    compartments: 0,
    equation: 'y = b0 + b1 (t - centre)',
    sketch: 'linear',
    analytic: true,
    prepare(_doses, timesH) {
      const t = Float64Array.from(timesH as ArrayLike<number>);
      return (params, out) => {
        const b0 = params[0];
        const b1 = params[1];
        for (let k = 0; k < t.length; k++) out[k] = b0 + b1 * (t[k] - centre);
        return Number.isFinite(b0) && Number.isFinite(b1);
      };
    },
  };
}
