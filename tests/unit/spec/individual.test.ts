import { describe, expect, it } from 'vitest';
import { getStructuralModel } from '../../../engine/models/catalogue.js';
import { parseModelSpec, type CovariateEffectSpec } from '../../../engine/spec/modelSpec.js';
import {
  checkIndividualParameters,
  covariateShift,
  CovariateValueError,
  parameterOverridesFromCovariates,
  toModelVector,
  naturalToTransformed,
  transformedToNatural,
  typicalIndividualParameters,
} from '../../../engine/spec/individual.js';

const cov = (x: Record<string, number | string>) => Object.assign(Object.create(null), x) as Record<string, number | string>;

describe('transforms', () => {
  it('forward (psi -> phi) and inverse (phi -> psi) are inverse to each other', () => {
    for (const t of ['log', 'logit', 'none'] as const) {
      for (const psi of [0.01, 0.3, 0.5, 0.99]) expect(transformedToNatural(t, naturalToTransformed(t, psi))).toBeCloseTo(psi, 14);
    }
    expect(naturalToTransformed('log', Math.E)).toBeCloseTo(1, 15);
    expect(naturalToTransformed('logit', 0.5)).toBe(0);
    expect(transformedToNatural('logit', -700)).toBeGreaterThan(0); // exp(phi)/(1+exp(phi)): no underflow to 0 before exp itself does
    expect(transformedToNatural('logit', 800)).toBe(1);
    expect(Number.isNaN(naturalToTransformed('log', 0))).toBe(true);
    expect(Number.isNaN(naturalToTransformed('logit', 1))).toBe(true);
  });
});

describe('covariateShift', () => {
  const power: CovariateEffectSpec = { parameter: 'CL', covariate: 'wt', relation: 'power', reference: 70, coefficient: 0.75, fixed: true };
  const linear: CovariateEffectSpec = { parameter: 'V', covariate: 'age', relation: 'linear', reference: 40, coefficient: 0.01, fixed: false };
  const cat: CovariateEffectSpec = { parameter: 'CL', covariate: 'sex', relation: 'categorical', reference: 'M', coefficients: cov({ F: -0.2 }) as Record<string, number>, fixed: false };
  it('power, linear and categorical relations', () => {
    expect(covariateShift(power, 140)).toBeCloseTo(0.75 * Math.log(2), 15);
    expect(covariateShift(linear, 50)).toBeCloseTo(0.1, 15);
    expect(covariateShift(cat, 'F')).toBe(-0.2);
    expect(covariateShift(cat, 'M')).toBe(0);
    expect(covariateShift(cat, 'X')).toBe(0);
    expect(covariateShift(cat, 'constructor')).toBe(0);
  });
  it('missing or wrong values throw, naming the covariate and subject', () => {
    expect(() => covariateShift(power, undefined, 'S7')).toThrow(CovariateValueError);
    expect(() => covariateShift(power, undefined, 'S7')).toThrow(/subject S7: covariate wt \(on CL\): no value/);
    expect(() => covariateShift(power, 'heavy')).toThrow(/needs a number/);
    expect(() => covariateShift(power, 0)).toThrow(/> 0/);
  });
});

describe('typicalIndividualParameters', () => {
  const spec = parseModelSpec({
    structure: '1cmt',
    parameters: {
      CL: { typical: 4, transform: 'log', bsv: 0.3 },
      V: { typical: 50, transform: 'log', bsv: null },
      ka: { typical: 1.2, transform: 'log', bsv: null },
    },
    covariates: [
      { parameter: 'CL', covariate: 'crcl', relation: 'power', reference: 80, coefficient: 0.75 },
      { parameter: 'V', covariate: 'wt', relation: 'linear', reference: 70, coefficient: 0.01 },
    ],
    residual: { model: 'proportional', b: 0.1 },
  });
  it('applies h(mu + shifts) and fills tlag 0 and F 1', () => {
    const p = typicalIndividualParameters(spec, cov({ crcl: 40, wt: 80 }));
    expect(p.CL).toBeCloseTo(4 * Math.pow(0.5, 0.75), 13); // power relation: CL = 4 (40/80)^0.75
    expect(p.V).toBeCloseTo(50 * Math.exp(0.1), 12);
    expect(p.ka).toBeCloseTo(1.2, 15);
    expect(p.tlag).toBe(0);
    expect(p.F).toBe(1);
    const model = getStructuralModel('1cmt');
    expect([...toModelVector(model, p)]).toEqual(model.parameterOrder.map((n) => p[n]));
  });
  it('a missing covariate names the subject', () => {
    expect(() => typicalIndividualParameters(spec, cov({ crcl: 40 }), 'B2')).toThrow(/subject B2: covariate wt/);
  });
  it('ka absent -> NaN, reported only when there are oral doses', () => {
    const noKa = parseModelSpec({ structure: '1cmt', parameters: { CL: { typical: 4 }, V: { typical: 50 } }, residual: { model: 'additive', a: 1 } });
    const p = typicalIndividualParameters(noKa, cov({}));
    expect(Number.isNaN(p.ka)).toBe(true);
    const model = getStructuralModel('1cmt');
    expect(checkIndividualParameters(model, p, [{ timeH: 0, amountMg: 1, route: 'bolus', durationH: 0 }])).toEqual([]);
    const problems = checkIndividualParameters(model, p, [{ timeH: 0, amountMg: 1, route: 'oral', durationH: 0 }]);
    expect(problems.map((x) => x.parameter)).toEqual(['ka']);
    expect(problems[0].message).toMatch(/oral doses/);
    expect(checkIndividualParameters(model, { ...p, CL: -1, ka: 1, F: 1.5 }, [{ timeH: 0, amountMg: 1, route: 'oral', durationH: 0 }]).map((x) => x.parameter)).toEqual(['CL', 'F']);
  });
  it('per-subject overrides come from covariates named like a parameter', () => {
    const model = getStructuralModel('2cmt');
    const o = parameterOverridesFromCovariates(model, cov({ CL: 3.3, V2: 41, wt: 70 }));
    expect({ ...o }).toEqual({ CL: 3.3, V2: 41 });
  });
});
