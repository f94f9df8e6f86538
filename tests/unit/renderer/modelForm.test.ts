/** The model editor's correlation blocks and the spec they produce (engine/spec/modelSpec.ts). */
import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { parseCanonicalCsv } from '../../../engine/data/canonicalCsv.js';
import { listStructuralModels } from '../../../engine/models/catalogue.js';
import { parseModelSpec } from '../../../engine/spec/modelSpec.js';
import { compileModel } from '../../../engine/stats/model.js';
import type { CatalogueEntry } from '../../../renderer/src/lib/types.js';
import { correlationPairs, correlationsOf, formFor, formToSpec, newCorrelationBlock, toggleInBlock } from '../../../renderer/src/features/models/modelForm.js';

function entry(id: string): CatalogueEntry {
  const m = listStructuralModels().find((x) => x.id === id)!;
  return { id: m.id, label: m.label, compartments: m.compartments, analytic: m.analytic, equation: m.equation, parameterOrder: [...m.parameterOrder], parameters: m.parameters.map((p) => ({ ...p, transforms: [...p.transforms] })) };
}

describe('model editor: correlated BSV', () => {
  it('gives no correlations until a block is added', () => {
    const r = formToSpec(formFor(entry('2cmt')));
    expect(r.problems).toEqual([]);
    expect(r.spec!.correlations).toEqual([]);
    expect(r.spec!.correlationValues).toBeUndefined();
  });

  it('writes blocks and correlation values in parameter order, and the engine builds Omega from them', () => {
    const f = formFor(entry('2cmt'));
    f.correlations.push(newCorrelationBlock(f));
    expect(f.correlations[0].parameters).toEqual(['CL', 'V1']);
    // Ticking out of order keeps the model's order: V2 after V1.
    toggleInBlock(f, 0, 'V2', true);
    expect(f.correlations[0].parameters).toEqual(['CL', 'V1', 'V2']);
    expect(correlationPairs(f.correlations[0]).map((p) => p.key)).toEqual(['CL,V1', 'CL,V2', 'V1,V2']);
    f.correlations[0].values['CL,V1'] = '0.4';
    f.correlations[0].values['V1,V2'] = '−0.2';
    const { spec, problems } = formToSpec(f);
    expect(problems).toEqual([]);
    expect(spec!.correlations).toEqual([['CL', 'V1', 'V2']]);
    expect(spec!.correlationValues).toEqual({ 'CL,V1': 0.4, 'V1,V2': -0.2 });
    const parsed = parseModelSpec(spec);
    expect(parsed.correlations).toEqual([['CL', 'V1', 'V2']]);
    // Off-diagonal of the initial Omega = r · SD1 · SD2 (definition of a covariance from a correlation; every BSV SD is 0.3 here).
    const dataset = parseCanonicalCsv(readFileSync(new URL('../../../resources/demo/ward-levels.csv', import.meta.url), 'utf8'));
    const m = compileModel(parsed, dataset);
    const n = Math.round(Math.sqrt(m.initial.omega.length));
    const eta = (name: string) => m.etaParameter.findIndex((j) => m.parameters[j].name === name);
    const [cl, v1, v2] = [eta('CL'), eta('V1'), eta('V2')];
    expect(m.initial.omega[cl * n + v1]).toBeCloseTo(0.4 * 0.3 * 0.3, 12);
    expect(m.initial.omega[v1 * n + v2]).toBeCloseTo(-0.2 * 0.3 * 0.3, 12);
    expect(m.initial.omega[cl * n + v2]).toBe(0);
    expect(m.blocks.some((b) => b.length === 3 && [cl, v1, v2].every((k) => b.includes(k)))).toBe(true);
  });

  it('names a parameter without BSV, an unused one, a short block and a parameter in two blocks', () => {
    const f = formFor(entry('2cmt'));
    f.parameters.find((p) => p.name === 'Q')!.bsvOn = false;
    f.correlations.push({ parameters: ['CL', 'Q'], values: {} }, { parameters: ['V1'], values: {} }, { parameters: ['CL', 'V2'], values: {} }, { parameters: ['ka', 'V1'], values: {} });
    const { problems } = correlationsOf(f);
    expect(problems.map((p) => [p.block, p.message])).toEqual([
      [0, 'Correlation block 1: Q has no between-subject variability (BSV), so it cannot be correlated; tick its BSV box above or untick it here.'],
      [1, 'Correlation block 2: tick at least two parameters with BSV, or remove the block.'],
      [2, 'Correlation block 3: CL is already in correlation block 1; a parameter belongs to one block, so tick all of its partners in one block.'],
      [3, 'Correlation block 4: ka is not used in this model; tick "Use ka" above or untick it here.'],
      [3, 'Correlation block 4: V1 is already in correlation block 2; a parameter belongs to one block, so tick all of its partners in one block.'],
    ]);
    expect(formToSpec(f).spec).toBeUndefined();
  });

  it('keeps correlations within ±0.95 and refuses values that cannot hold together', () => {
    const f = formFor(entry('2cmt'));
    f.correlations.push({ parameters: ['CL', 'V1'], values: { 'CL,V1': '0.97' } });
    expect(correlationsOf(f).problems.map((p) => p.message)).toEqual(['Correlation block 1, CL with V1: "0.97" is not a correlation from −0.95 to 0.95.']);
    f.correlations[0].values['CL,V1'] = 'strong';
    expect(correlationsOf(f).problems).toHaveLength(1);
    f.correlations[0].values['CL,V1'] = '-0.95';
    expect(correlationsOf(f).problems).toEqual([]);
    // r12 = r13 = 0.9, r23 = -0.9: determinant 1 - 3(0.81) + 2(0.9)(0.9)(-0.9) = -2.888 < 0, so no
    // correlation matrix (Sylvester's criterion; arithmetic by hand).
    f.correlations[0] = { parameters: ['CL', 'V1', 'Q'], values: { 'CL,V1': '0.9', 'CL,Q': '0.9', 'V1,Q': '-0.9' } };
    expect(correlationsOf(f).problems.map((p) => p.message)).toEqual(['Correlation block 1: these 3 correlations cannot hold together (their matrix is not positive definite); make some of them smaller in size.']);
    // 0.5 everywhere: determinant 1 - 3(0.25) + 2(0.125) = 0.5 > 0, a valid correlation matrix.
    f.correlations[0].values = { 'CL,V1': '0.5', 'CL,Q': '0.5', 'V1,Q': '0.5' };
    expect(correlationsOf(f).problems).toEqual([]);
    expect(parseModelSpec(formToSpec(f).spec).correlationValues).toEqual({ 'CL,V1': 0.5, 'CL,Q': 0.5, 'V1,Q': 0.5 });
  });

  it('a new block takes the first two parameters with BSV that are in no block yet', () => {
    const f = formFor(entry('2cmt'));
    f.correlations.push(newCorrelationBlock(f));
    f.correlations.push(newCorrelationBlock(f));
    expect(f.correlations.map((b) => b.parameters)).toEqual([['CL', 'V1'], ['Q', 'V2']]);
    expect(newCorrelationBlock(f).parameters).toEqual([]);
  });
});
