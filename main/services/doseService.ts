/**
 * Dose advice on the Node side: finds the resources (caution text, target presets), reads the
 * model, patient and target files, and runs the engine. Shared by the CLI and, later, the app.
 */
import { parseSaemSettings } from '../../engine/saem/settings.js';
import { existsSync, promises as fs } from 'node:fs';
import * as path from 'node:path';
import { fileURLToPath } from 'node:url';
import { adviseDose, type Advice, type AdviceOptions } from '../../engine/dosing/advise.js';
import { parsePatient, type Patient } from '../../engine/dosing/patient.js';
import { loadPopulationModel, type PopulationModel } from '../../engine/dosing/population.js';
import { parseTarget, type TargetSpec } from '../../engine/dosing/targets.js';
import { jsonFileKind, type JsonFileKind } from '../../engine/spec/fileKind.js';
import { literatureStatus, valuesFingerprint } from '../../engine/spec/literature.js';
import { parseModelSpec } from '../../engine/spec/modelSpec.js';
import { printable } from '../../engine/text/printable.js';
import { ENGINE_VERSION } from '../../engine/version.js';
import { MAX_FIT_RECORD_BYTES } from './fileGuard.js';
import { readJsonFile, writeFileAtomic } from './files.js';
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
    throw new ServiceError('file', `target "${printable(nameOrPath)}" is neither a preset (${presets.join(', ')}) nor a file`);
  const json = await readJsonFile(file);
  checkKind(file, json, ['target file'], 'a target preset or target file', '--target');
  return parseAs(file, () => parseTarget(json), 'invalid target');
}

/**
 * Refuse a file of another kind with a sentence naming both kinds ("this looks like a patient
 * file; --model expects a model spec or fit.json") instead of an error about a missing field.
 */
function checkKind(file: string, json: unknown, expected: readonly JsonFileKind[], expectedText: string, option: string): void {
  const kind = jsonFileKind(json);
  if (kind === undefined || expected.includes(kind)) return;
  const article = (k: string) => (k === 'fit.json' ? 'a fit.json' : /^[aeiou]/.test(k) ? `an ${k}` : `a ${k}`);
  throw new ServiceError('file', `${printable(file)}: this looks like ${article(kind)}; ${option} expects ${expectedText}${option === '--model' || option === '--patient' ? ' (were --model and --patient swapped?)' : ''}`);
}

/** Run a parser; its problems become a ServiceError naming the file, each printable. */
function parseAs<T>(file: string, parse: () => T, what: string): T {
  try {
    return parse();
  } catch (e) {
    const problems = (e as { problems?: unknown }).problems;
    if (Array.isArray(problems)) {
      const list = problems.map((p) => printable(String(p)));
      throw new ServiceError('spec', `${printable(file)}: ${what}:\n${list.map((p) => `  ${p}`).join('\n')}`, list);
    }
    throw e;
  }
}

/** A site fit (fit.json) or a model spec, for --model. */
export async function loadModelFile(file: string, option = '--model'): Promise<PopulationModel> {
  const json = await readJsonFile(file, MAX_FIT_RECORD_BYTES);
  checkKind(file, json, ['model spec', 'fit.json'], 'a model spec or fit.json', option);
  return parseAs(
    file,
    () => {
      const model = loadPopulationModel(json);
      // The estimation block is not used for dosing, but a wrong one is named, not ignored.
      const estimation = (json as { estimation?: unknown }).estimation;
      if (estimation !== undefined && typeof estimation === 'object' && estimation !== null && !Array.isArray(estimation)) parseSaemSettings(estimation as Record<string, unknown>);
      return model;
    },
    'invalid model file',
  );
}

export async function loadPatientFile(file: string, option = '--patient'): Promise<Patient> {
  const json = await readJsonFile(file);
  checkKind(file, json, ['patient file'], 'a patient file (patient.json: id, covariates, doses, levels)', option);
  return parseAs(file, () => parsePatient(json), 'invalid patient file');
}

export type DoseRequest = Omit<AdviceOptions, 'caution' | 'engineVersion'>;

/** Run the engine with the caution text and the engine version filled in. */
export async function runDoseAdvice(request: DoseRequest): Promise<Advice> {
  const caution = await loadCaution();
  return adviseDose({ ...request, caution, engineVersion: ENGINE_VERSION });
}

/**
 * Record that a named user checked every value of a published model against the publication:
 * writes `literature.verified` {by, date, values fingerprint} and `valuesFrom: "publication"`
 * into the file (atomically). The spec must parse and carry a `literature` block.
 */
export async function verifyLiteratureModel(file: string, by: string, date: string): Promise<{ by: string; date: string; values: string }> {
  if (!by.trim() || hasUnsafe(by)) throw new ServiceError('usage', '--by: give the name of the person who checked the values (printable text)');
  if (!/^\d{4}-\d{2}-\d{2}$/.test(date)) throw new ServiceError('usage', `--date: ${printable(date)} is not YYYY-MM-DD`);
  const json = await readJsonFile(file);
  checkKind(file, json, ['model spec'], 'a model spec with a literature block', '--verify');
  const spec = parseAs(file, () => parseModelSpec(json), 'invalid model spec');
  if (!spec.literature) throw new ServiceError('spec', `${printable(file)}: the model has no "literature" block (citation, population, valuesFrom, status): only published models are verified this way`);
  const raw = json as Record<string, unknown>;
  const literature = raw.literature as Record<string, unknown>;
  const verified = { by: by.trim(), date, values: valuesFingerprint(spec) };
  literature.valuesFrom = 'publication';
  literature.status = `verified: every value checked against the publication by ${verified.by} on ${date}`;
  literature.verified = verified;
  await writeFileAtomic(file, `${JSON.stringify(raw, null, 2)}\n`);
  return verified;
}

function hasUnsafe(text: string): boolean {
  return printable(text) !== text;
}

/** The literature models shipped in resources/models/literature, with their verification status. */
export async function listLiteratureModels(dir = resourcesDir()): Promise<Array<{ file: string; drug: string; citation: string; verified: boolean; status: string }>> {
  const folder = path.join(dir, 'models', 'literature');
  const files = (await fs.readdir(folder).catch(() => [] as string[])).filter((f) => f.endsWith('.json')).sort();
  const out: Array<{ file: string; drug: string; citation: string; verified: boolean; status: string }> = [];
  for (const f of files) {
    const file = path.join(folder, f);
    const json = await readJsonFile(file);
    const spec = parseAs(file, () => parseModelSpec(json), 'invalid model spec');
    if (!spec.literature) continue;
    const st = literatureStatus(spec.literature, spec);
    out.push({ file, drug: spec.literature.drug, citation: spec.literature.citation, verified: st.verified, status: st.reason });
  }
  return out;
}
