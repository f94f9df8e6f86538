/**
 * Fuzz (issue 9): every known key of the hand-written JSON inputs with one edit applied
 * (deletion, insertion, substitution, transposition of adjacent characters) is refused, naming
 * its JSON path and a nearest known key. Bases: resources/demo/ward-model.json,
 * resources/demo/patient.json, resources/targets/vancomycin-auc24.json; every location is
 * fuzzed with its full key list.
 */
import { readFileSync } from 'node:fs';
import * as path from 'node:path';
import { describe, expect, it } from 'vitest';
import { DOSE_KEYS, LEVEL_KEYS, parsePatient, PATIENT_KEYS, RENAL_KEYS } from '../../../engine/dosing/patient.js';
import { CONDITION_KEYS, parseTarget, REGIMEN_KEYS, TARGET_KEYS } from '../../../engine/dosing/targets.js';
import { childPath, editDistance } from '../../../engine/json/knownKeys.js';
import { LITERATURE_KEYS, VERIFIED_KEYS } from '../../../engine/spec/literature.js';
import { COVARIATE_EFFECT_KEYS, PARAMETER_KEYS, parseModelSpec, RESIDUAL_KEYS, SOLVER_KEYS, SPEC_KEYS } from '../../../engine/spec/modelSpec.js';

const ROOT = path.resolve(__dirname, '../../..');
const read = (rel: string) => JSON.parse(readFileSync(path.join(ROOT, rel), 'utf8')) as Record<string, any>;
const ALPHABET = ['a', 'e', 's', 'x', '_', 'L'];

/** Every string one edit away from `key`. */
export function oneEdit(key: string): Set<string> {
  const out = new Set<string>();
  for (let i = 0; i < key.length; i++) out.add(key.slice(0, i) + key.slice(i + 1));
  for (let i = 0; i + 1 < key.length; i++) out.add(key.slice(0, i) + key[i + 1] + key[i] + key.slice(i + 2));
  for (let i = 0; i <= key.length; i++) for (const c of ALPHABET) out.add(key.slice(0, i) + c + key.slice(i));
  for (let i = 0; i < key.length; i++) for (const c of ALPHABET) out.add(key.slice(0, i) + c + key.slice(i + 1));
  out.delete(key);
  return out;
}

interface Location {
  name: string;
  base: () => Record<string, any>;
  /** The object whose keys are fuzzed, inside a fresh base. */
  at: (root: Record<string, any>) => Record<string, any>;
  jsonPath: string;
  known: readonly string[];
  parse: (root: unknown) => unknown;
}

function literatureSpec(): Record<string, any> {
  const s = read('resources/demo/ward-model.json');
  s.literature = { drug: 'x', citation: 'c', population: 'p', valuesFrom: 'memory', status: 'unverified', notes: [], verified: { by: 'b', date: '2026-01-01', values: 'v' } };
  return s;
}

const LOCATIONS: Location[] = [
  { name: 'spec', base: () => read('resources/demo/ward-model.json'), at: (r) => r, jsonPath: '', known: SPEC_KEYS, parse: parseModelSpec },
  { name: 'spec parameter', base: () => read('resources/demo/ward-model.json'), at: (r) => r.parameters.CL, jsonPath: 'parameters.CL', known: PARAMETER_KEYS, parse: parseModelSpec },
  { name: 'spec covariate effect', base: () => read('resources/demo/ward-model.json'), at: (r) => r.covariates[0], jsonPath: 'covariates[0]', known: COVARIATE_EFFECT_KEYS, parse: parseModelSpec },
  { name: 'spec residual', base: () => read('resources/demo/ward-model.json'), at: (r) => r.residual, jsonPath: 'residual', known: RESIDUAL_KEYS, parse: parseModelSpec },
  { name: 'spec solver', base: () => ({ ...read('resources/demo/ward-model.json'), solver: { relTol: 1e-8, absTol: 1e-10, maxSteps: 1000 } }), at: (r) => r.solver, jsonPath: 'solver', known: SOLVER_KEYS, parse: parseModelSpec },
  { name: 'spec literature', base: literatureSpec, at: (r) => r.literature, jsonPath: 'literature', known: LITERATURE_KEYS, parse: parseModelSpec },
  { name: 'spec literature.verified', base: literatureSpec, at: (r) => r.literature.verified, jsonPath: 'literature.verified', known: VERIFIED_KEYS, parse: parseModelSpec },
  { name: 'patient', base: () => read('resources/demo/patient.json'), at: (r) => r, jsonPath: '', known: PATIENT_KEYS, parse: parsePatient },
  { name: 'patient dose', base: () => read('resources/demo/patient.json'), at: (r) => r.doses[1], jsonPath: 'doses[1]', known: DOSE_KEYS, parse: parsePatient },
  { name: 'patient level', base: () => read('resources/demo/patient.json'), at: (r) => r.levels[0], jsonPath: 'levels[0]', known: LEVEL_KEYS, parse: parsePatient },
  { name: 'patient renal', base: () => ({ ...read('resources/demo/patient.json'), renal: [{ time: '2026-11-23T08:00', scr_umol_L: 104 }] }), at: (r) => r.renal[0], jsonPath: 'renal[0]', known: RENAL_KEYS, parse: parsePatient },
  { name: 'target', base: () => read('resources/targets/vancomycin-auc24.json'), at: (r) => r, jsonPath: '', known: TARGET_KEYS, parse: parseTarget },
  { name: 'target goal', base: () => read('resources/targets/vancomycin-auc24.json'), at: (r) => r.goals[0], jsonPath: 'goals[0]', known: CONDITION_KEYS, parse: parseTarget },
  { name: 'target toxic', base: () => read('resources/targets/vancomycin-auc24.json'), at: (r) => r.toxic[0], jsonPath: 'toxic[0]', known: CONDITION_KEYS, parse: parseTarget },
  { name: 'target regimen', base: () => read('resources/targets/vancomycin-auc24.json'), at: (r) => r.regimen, jsonPath: 'regimen', known: REGIMEN_KEYS, parse: parseTarget },
];

describe('misspelt keys are refused with the nearest key named', () => {
  let total = 0;
  for (const loc of LOCATIONS) {
    it(`${loc.name}: every known key with one edit`, () => {
      const misses: string[] = [];
      for (const key of loc.known) {
        for (const mutant of oneEdit(key)) {
          if (loc.known.includes(mutant)) continue; // another valid key, not a misspelling
          const root = loc.base();
          const obj = loc.at(root);
          const value = key in obj ? obj[key] : 1;
          delete obj[key];
          obj[mutant] = value;
          total++;
          let problems: string[] | undefined;
          try {
            loc.parse(root);
          } catch (e) {
            problems = [...((e as { problems?: string[] }).problems ?? [])];
          }
          const prefix = `${childPath(loc.jsonPath, mutant)}: unknown key (did you mean "`;
          const line = problems?.find((p) => p.startsWith(prefix));
          const named = line ? line.slice(prefix.length, line.indexOf('"', prefix.length)) : undefined;
          // The named key is one edit away (ties between known keys at distance 1 are allowed).
          if (named === undefined || editDistance(mutant.toLowerCase(), named.toLowerCase()) > 1) misses.push(`${loc.name}: ${JSON.stringify(mutant)} -> ${problems ? problems.join(' | ') : 'accepted'}`);
        }
      }
      expect(misses.slice(0, 5)).toEqual([]);
    });
  }
  it('prints the count', () => {
    console.log(`misspelt-key fuzz: ${total} misspellings tried, every one refused with its path and nearest key`);
    expect(total).toBeGreaterThan(3000);
  });
});
