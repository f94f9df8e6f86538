/**
 * A literature model entered in a form (the Models editor plus its source and the covariate
 * ranges of its population), checked by the engine's spec parser before it is used.
 */
import { parseModelSpec } from '../../../../engine/spec/modelSpec.js';
import type { CatalogueEntry } from '../../lib/types.js';
import { formFor, formToSpec, type ModelForm } from '../models/modelForm.js';

/** An empty literature-model form for a structure: catalogue starting values, source and ranges to fill in. */
export function literatureForm(entry: CatalogueEntry): ModelForm {
  const f = formFor(entry);
  f.name = '';
  f.source = '';
  f.ranges = [{ covariate: 'weight_kg', min: '', max: '' }];
  return f;
}

/** The spec of the form, or every problem in words. */
export function checkEnteredForm(f: ModelForm): { spec?: Record<string, unknown>; problems: string[] } {
  const built = formToSpec(f);
  const problems = [...built.problems];
  if (!f.name.trim()) problems.unshift('Name: give the model a name (drug, population, publication).');
  if (!built.spec || problems.length) return { problems };
  try {
    parseModelSpec(built.spec);
  } catch (e) {
    return { problems: [e instanceof Error ? e.message : String(e)] };
  }
  return { spec: built.spec, problems: [] };
}
