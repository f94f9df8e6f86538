import { describe, expect, it } from 'vitest';
import { createDataset, type SubjectInput } from '../../../engine/data/dataset.js';
import { getStructuralModel } from '../../../engine/models/catalogue.js';
import { parseModelSpec } from '../../../engine/spec/modelSpec.js';
import { compileModel, mergeBlocks, ModelDataError } from '../../../engine/stats/model.js';
import { observationLogLik } from '../../../engine/stats/residual.js';

const oralSubject = (id: string, cov: Record<string, number | string> = { wt: 70 }): SubjectInput => ({
  id,
  covariates: cov,
  doses: [{ timeH: 0, amountMg: 100, route: 'oral', durationH: 0 }],
  observations: [
    { timeH: 1, valueMgL: 2, censored: false },
    { timeH: 4, valueMgL: 1.5, censored: false },
    { timeH: 12, valueMgL: 0.1, censored: true, lloqMgL: 0.1 },
  ],
});
const ivSubject = (id: string): SubjectInput => ({
  id,
  doses: [{ timeH: 0, amountMg: 100, route: 'bolus', durationH: 0 }],
  observations: [{ timeH: 2, valueMgL: 2, censored: false }],
});
const oralSpec = (extra: Record<string, unknown> = {}) =>
  parseModelSpec({
    structure: '1cmt',
    parameters: { CL: { typical: 5, bsv: 0.3 }, V: { typical: 50, bsv: 0.2 }, ka: { typical: 1, bsv: null } },
    residual: { model: 'combined', a: 0.1, b: 0.1 },
    ...extra,
  });

function problemsOf(fn: () => unknown): string {
  try {
    fn();
  } catch (e) {
    expect(e).toBeInstanceOf(ModelDataError);
    return (e as Error).message;
  }
  throw new Error('expected a ModelDataError');
}

describe('compileModel', () => {
  const data = createDataset([oralSubject('A', { wt: 60, sex: 'F' }), oralSubject('B', { wt: 80, sex: 'M' }), oralSubject('C', { wt: 70, sex: 'F' })]);

  it('lays out parameters, random effects, covariate terms and the design', () => {
    const spec = oralSpec({
      covariates: [
        { parameter: 'CL', covariate: 'wt', relation: 'power', reference: 70, coefficient: 0.75, fixed: true },
        { parameter: 'V', covariate: 'sex', relation: 'categorical', reference: 'M' },
      ],
    });
    const m = compileModel(spec, data);
    expect(m.parameters.map((p) => [p.name, p.etaIndex, p.modelIndex])).toEqual([['CL', 0, 0], ['V', 1, 1], ['ka', -1, 2]]);
    expect(m.nEta).toBe(2);
    expect(m.covariateTerms.map((t) => t.label)).toEqual(['CL~wt', 'V~sex=F']);
    expect(m.subjects[0].design[0]).toBeCloseTo(Math.log(60 / 70), 15);
    expect(Array.from(m.subjects.map((s) => s.design[1]))).toEqual([1, 0, 1]);
    const mean = new Float64Array(3);
    m.meanPhi(0, m.initial, mean);
    expect(mean[0]).toBeCloseTo(Math.log(5) + 0.75 * Math.log(60 / 70), 14);
    expect(m.nCensoredTotal).toBe(3);
  });

  it('subjectLogLik sums the observation terms, the censored one through P(Y < LLOQ)', () => {
    const m = compileModel(oralSpec(), data);
    const phi = Float64Array.from([Math.log(5), Math.log(50), Math.log(1)]);
    const f = new Float64Array(3);
    expect(m.predict(0, phi, f)).toBe(true);
    const s = m.subjects[0];
    let expected = 0;
    for (let k = 0; k < 3; k++) expected += observationLogLik('combined', 0.1, 0.1, s.y[k], f[k], s.censored[k] === 1, s.lloqMgL[k]);
    expect(m.subjectLogLik(0, phi)).toBeCloseTo(expected, 12);
    expect(m.subjectLogLik(0, Float64Array.from([Math.log(5), Math.log(50), 800]))).toBe(-Infinity);
  });

  it('the fast uncensored paths (additive, log-additive, proportional, combined) equal the sum of observation terms', () => {
    const uncensored = createDataset([oralSubject('A'), oralSubject('B')].map((x) => ({ ...x, observations: x.observations.filter((o) => !o.censored) })));
    for (const residual of [{ model: 'additive', a: 0.3, b: 0 }, { model: 'log-additive', a: 0.2, b: 0 }, { model: 'proportional', a: 0, b: 0.2 }, { model: 'combined', a: 0.1, b: 0.2 }] as const) {
      const m = compileModel(oralSpec({ residual }), uncensored);
      const phi = Float64Array.from([Math.log(4), Math.log(40), Math.log(1.2)]);
      const f = new Float64Array(2);
      m.predict(1, phi, f);
      let expected = 0;
      for (let k = 0; k < 2; k++) expected += observationLogLik(residual.model, residual.a, residual.b, m.subjects[1].y[k], f[k], false, 0);
      expect(m.logLikFromPredictions(1, f, residual.a, residual.b)).toBeCloseTo(expected, 12);
      expect(m.logLikFromPredictions(1, Float64Array.from([NaN, 1]), residual.a, residual.b)).toBe(-Infinity);
    }
  });

  it('logPrior is the multivariate normal log density of the random effects', () => {
    const spec = oralSpec({ correlations: [['CL', 'V']], correlationValues: { 'CL,V': 0.5 } });
    const m = compileModel(spec, data);
    const factor = m.priorFactor(m.initial.omega)!;
    const phi = Float64Array.from([Math.log(5) + 0.1, Math.log(50) - 0.2, 0]);
    // Bivariate normal density written out (common practice).
    const s1 = 0.3, s2 = 0.2, r = 0.5, x = 0.1 / s1, y = -0.2 / s2;
    const expected = -Math.log(2 * Math.PI * s1 * s2 * Math.sqrt(1 - r * r)) - (x * x - 2 * r * x * y + y * y) / (2 * (1 - r * r));
    expect(m.logPrior(0, phi, m.initial, factor)).toBeCloseTo(expected, 12);
  });

  it('merges overlapping correlation blocks', () => {
    expect(mergeBlocks(5, [[0, 1], [1, 3]])).toEqual([[0, 1, 3], [2], [4]]);
  });

  it('refuses oral doses without ka, naming the subjects', () => {
    const spec = parseModelSpec({ structure: '1cmt', parameters: { CL: { typical: 5, bsv: 0.3 }, V: { typical: 50, bsv: 0.2 } }, residual: { model: 'additive', a: 0.1 } });
    expect(problemsOf(() => compileModel(spec, data))).toMatch(/oral doses \(subjects A, B, C\).*add ka/);
  });

  it('refuses an absorption model on IV data', () => {
    const iv = createDataset([ivSubject('X'), ivSubject('Y')]);
    expect(problemsOf(() => compileModel(oralSpec(), iv))).toMatch(/no oral dose.*ka cannot be estimated/);
  });

  it('names the subject and covariate when a covariate is missing or unusable', () => {
    const d = createDataset([oralSubject('A', { wt: 60 }), oralSubject('B', {}), oralSubject('C', { wt: -3 })]);
    const msg = problemsOf(() => compileModel(oralSpec({ covariates: [{ parameter: 'CL', covariate: 'wt', relation: 'power', reference: 70 }] }), d));
    expect(msg).toMatch(/subject B, covariate wt: no value for covariate wt/);
  });

  it('refuses a power covariate <= 0 and a regressor constant across subjects', () => {
    const d = createDataset([oralSubject('A', { wt: 0 }), oralSubject('B', { wt: 70 })]);
    expect(problemsOf(() => compileModel(oralSpec({ covariates: [{ parameter: 'CL', covariate: 'wt', relation: 'power', reference: 70 }] }), d))).toMatch(/subject A, covariate wt: value 0 cannot enter a power relation/);
    const same = createDataset([oralSubject('A', { wt: 70 }), oralSubject('B', { wt: 70 })]);
    expect(problemsOf(() => compileModel(oralSpec({ covariates: [{ parameter: 'CL', covariate: 'wt', relation: 'linear', reference: 70 }] }), same))).toMatch(/one value for every subject/);
  });

  it('refuses a transform outside the parameter domain', () => {
    const spec = oralSpec();
    const bad = { ...spec, parameters: { ...spec.parameters, CL: { ...spec.parameters.CL!, transform: 'logit' as const, typical: 0.5 } } };
    expect(problemsOf(() => compileModel(bad, data))).toMatch(/parameter CL: transform "logit" does not respect the domain/);
  });

  it('refuses an initial Omega that is not positive definite', () => {
    const spec = parseModelSpec({
      structure: '1cmt',
      parameters: { CL: { typical: 5, bsv: 0.3 }, V: { typical: 50, bsv: 0.2 }, ka: { typical: 1, bsv: 0.5 } },
      correlations: [['CL', 'V', 'ka']],
      correlationValues: { 'CL,V': 0.9, 'CL,ka': 0.9, 'V,ka': -0.9 },
      residual: { model: 'additive', a: 0.1 },
    });
    expect(problemsOf(() => compileModel(spec, data))).toMatch(/initial Omega .* not positive definite/);
  });

  it('refuses one subject with BSV, accepts it (with a warning) without BSV', () => {
    const one = createDataset([oralSubject('solo')]);
    expect(problemsOf(() => compileModel(oralSpec(), one))).toMatch(/subject solo: the dataset has one subject/);
    const pooled = parseModelSpec({ structure: '1cmt', parameters: { CL: { typical: 5 }, V: { typical: 50 }, ka: { typical: 1 } }, residual: { model: 'additive', a: 0.1 } });
    expect(compileModel(pooled, one).warnings.join(' ')).toMatch(/one subject/);
  });

  it('warns about an all-censored subject', () => {
    const allCens: SubjectInput = { ...oralSubject('Z'), observations: [{ timeH: 12, valueMgL: 0.1, censored: true, lloqMgL: 0.1 }] };
    const m = compileModel(oralSpec(), createDataset([oralSubject('A'), allCens]));
    expect(m.warnings.join(' ')).toMatch(/subject Z: every level is below the LLOQ/);
  });

  it('refuses levels <= 0 under log-additive error', () => {
    const d = createDataset([{ ...oralSubject('A'), observations: [{ timeH: 1, valueMgL: 0, censored: false, sourceRow: 7 }] }, oralSubject('B')]);
    const spec = oralSpec({ residual: { model: 'log-additive', a: 0.2 } });
    expect(problemsOf(() => compileModel(spec, d))).toMatch(/subject A: level 0 mg\/L at 1 h \(row 7\)/);
  });

  it('uses the catalogue model by default', () => {
    expect(compileModel(oralSpec(), data).structural).toBe(getStructuralModel('1cmt'));
  });
});
