/** A literature model typed in by the user as a model spec, checked by the engine's parser. */
import { parseModelSpec } from '../../../../engine/spec/modelSpec.js';

/** A starting point for a model typed in: the fields a literature model needs (invented values). */
export const ENTERED_EXAMPLE = JSON.stringify(
  {
    name: 'model from a publication (fill in)',
    source: 'authors, journal, year; population and setting',
    structure: '1cmt',
    parameters: { CL: { typical: 4, bsv: 0.3 }, V: { typical: 50, bsv: 0.2 } },
    covariates: [],
    residual: { model: 'combined', a: 1, b: 0.15 },
    covariateRanges: { weight_kg: [40, 130] },
  },
  null,
  2,
);

/** The typed-in spec checked by the engine's parser, or the problem in words. */
export function checkEnteredSpec(text: string): { spec?: Record<string, unknown>; problem?: string } {
  let json: unknown;
  try {
    json = JSON.parse(text);
  } catch (e) {
    return { problem: `the model is not valid JSON: ${e instanceof Error ? e.message : String(e)}` };
  }
  try {
    parseModelSpec(json);
  } catch (e) {
    return { problem: e instanceof Error ? e.message : String(e) };
  }
  const spec = json as Record<string, unknown>;
  if (typeof spec.source !== 'string' || !spec.source.trim() || /fill in|authors, journal/.test(spec.source)) return { problem: 'give the model\'s source (publication, population and setting) in "source"' };
  return { spec };
}
