/**
 * A short SAEM fit of the Theoph data (R datasets::Theoph, exported by
 * resources/validation/reference/theoph/export_theoph.R) through `plateau fit`, for tests that need a real
 * fit.json (dose advice from a site fit). Theoph doses are mg/kg, so CL and V are per kg.
 */
import { readFileSync, writeFileSync } from 'node:fs';
import * as path from 'node:path';
import { fileURLToPath } from 'node:url';
import { runCli } from '../../main/cli/run.js';
import { captureIo } from './captureIo.js';

export const theophCsv = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '../../resources/validation/reference/theoph/theoph.csv');

const spec = {
  name: 'Theoph one-compartment (test)',
  structure: '1cmt',
  parameters: { CL: { typical: 0.05, bsv: 0.3 }, V: { typical: 0.5, bsv: 0.3 }, ka: { typical: 1.5, bsv: 0.3 } },
  covariates: [{ parameter: 'CL', covariate: 'weight_kg', relation: 'power', reference: 70, coefficient: 0.75, fixed: true }],
  residual: { model: 'additive', a: 1 },
  estimation: { searchMinIterations: 60, searchMaxIterations: 100, averagingIterations: 50 },
};

/** Fit into `dir` (spec.json, fit.json written there, seed 3); returns the parsed fit.json. */
export async function fitTheophInto(dir: string): Promise<any> {
  writeFileSync(path.join(dir, 'spec.json'), JSON.stringify(spec));
  const f = captureIo(dir);
  const code = await runCli(['fit', '--data', theophCsv, '--model', 'spec.json', '--seed', '3', '--out', 'fit.json'], f.io);
  if (code !== 0) throw new Error(`plateau fit failed: ${f.err()}`);
  return JSON.parse(readFileSync(path.join(dir, 'fit.json'), 'utf8'));
}
