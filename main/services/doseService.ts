/**
 * Dose advice on the Node side: finds the resources (caution text, target presets), reads the
 * model, patient and target files, and runs the engine. Shared by the CLI and, later, the app.
 */
import { existsSync, promises as fs } from 'node:fs';
import * as path from 'node:path';
import { fileURLToPath } from 'node:url';
import { adviseDose, type Advice, type AdviceOptions } from '../../engine/dosing/advise.js';
import { parsePatient, type Patient } from '../../engine/dosing/patient.js';
import { loadPopulationModel, type PopulationModel } from '../../engine/dosing/population.js';
import { parseTarget, type TargetSpec } from '../../engine/dosing/targets.js';
import { ENGINE_VERSION } from '../../engine/version.js';
import { readJsonFile } from './files.js';
import { ServiceError } from './serviceError.js';

/** The repository (or installed app) folder holding resources/, found by walking up from here. */
export function resourcesDir(): string {
  let dir = path.dirname(fileURLToPath(import.meta.url));
  for (let i = 0; i < 8; i++) {
    const candidate = path.join(dir, 'resources');
    if (existsSync(path.join(candidate, 'cautions', 'dosing.json'))) return candidate;
    const up = path.dirname(dir);
    if (up === dir) break;
    dir = up;
  }
  throw new ServiceError('file', 'cannot find the resources folder (resources/cautions/dosing.json): the installation is incomplete');
}

/** The dosing caution text: one source of truth, resources/cautions/dosing.json. */
export async function loadCaution(dir = resourcesDir()): Promise<string> {
  const file = path.join(dir, 'cautions', 'dosing.json');
  const json = (await readJsonFile(file)) as { text?: unknown };
  if (typeof json?.text !== 'string' || !json.text.trim()) throw new ServiceError('file', `${file}: the caution text is missing; dose advice is never given without it`);
  return json.text;
}

export async function listTargetPresets(dir = resourcesDir()): Promise<string[]> {
  const files = await fs.readdir(path.join(dir, 'targets')).catch(() => [] as string[]);
  return files.filter((f) => f.endsWith('.json')).map((f) => f.replace(/\.json$/, '')).sort();
}

/** A preset id (resources/targets/<id>.json) or a path to the user's own target file. */
export async function loadTarget(nameOrPath: string, cwd: string, dir = resourcesDir()): Promise<TargetSpec> {
  const presets = await listTargetPresets(dir);
  const file = presets.includes(nameOrPath) ? path.join(dir, 'targets', `${nameOrPath}.json`) : path.resolve(cwd, nameOrPath);
  if (!presets.includes(nameOrPath) && !existsSync(file))
    throw new ServiceError('file', `target "${nameOrPath}" is neither a preset (${presets.join(', ')}) nor a file`);
  const json = await readJsonFile(file);
  try {
    return parseTarget(json);
  } catch (e) {
    throw new ServiceError('file', `${file}: ${(e as Error).message}`);
  }
}

export async function loadModelFile(file: string): Promise<PopulationModel> {
  const json = await readJsonFile(file);
  try {
    return loadPopulationModel(json);
  } catch (e) {
    const err = e as Error;
    err.message = `${file}: ${err.message}`;
    throw err;
  }
}

export async function loadPatientFile(file: string): Promise<Patient> {
  const json = await readJsonFile(file);
  try {
    return parsePatient(json);
  } catch (e) {
    const err = e as Error;
    err.message = `${file}: ${err.message}`;
    throw err;
  }
}

export type DoseRequest = Omit<AdviceOptions, 'caution' | 'engineVersion'>;

/** Run the engine with the caution text and the engine version filled in. */
export async function runDoseAdvice(request: DoseRequest): Promise<Advice> {
  const caution = await loadCaution();
  return adviseDose({ ...request, caution, engineVersion: ENGINE_VERSION });
}
