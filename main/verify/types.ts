/**
 * The installation verification suite: the shape of resources/validation/suite.json and of the
 * report every host (CLI, app, tests) receives. Plain data only, so it crosses process and IPC
 * boundaries unchanged.
 */

/** Tolerances as stored in suite.json: numbers, nested groups or a plain-words note. */
export type ToleranceValues = { [key: string]: number | string | ToleranceValues };

/** One check of suite.json. Keys beyond these are read by the check's own kind. */
export interface CheckSpec {
  id: string;
  part: string;
  kind: string;
  title: string;
  purpose: string;
  source: string;
  /** Reference file, relative to the validation folder. */
  reference: string;
  tolerance: ToleranceValues;
  quick: boolean;
  /** `planned`: listed in the report, not run, not a failure. */
  status?: 'planned';
  seed?: number;
  [extra: string]: unknown;
}

/** Map from one estimate of the fit record to its key in the reference file. */
export interface EstimateMap {
  kind: 'typical' | 'bsv' | 'correlation' | 'covariate' | 'residual';
  parameter: string;
  covariate?: string;
  /** Key in the reference file's estimates (and standard errors). */
  key: string;
  label: string;
  /** Name of the check's tolerance that applies. */
  tolerance: string;
}

/** A dataset with its model and exact reference, shared by the population-fit checks. */
export interface DatasetEntry {
  data: string;
  reference: string;
  /** Dotted path of the estimates object in the reference file. */
  referenceEstimates: string;
  /** Dotted path of the natural-scale standard errors, when the reference has them. */
  referenceSe?: string;
  model: unknown;
  estimates: EstimateMap[];
  note?: string;
}

export interface SuiteSpec {
  format: string;
  title: string;
  scope: string;
  notes?: string;
  checks: CheckSpec[];
  datasets: Record<string, DatasetEntry>;
}

/** One compared quantity of a check. */
export interface CheckRow {
  quantity: string;
  reference: number | string;
  found: number | string;
  /** The measured difference (relative or absolute, as `limit` says). */
  error?: number;
  limit?: string;
  /** The limit as a number in the units of `error` (for ranking rows by how close they came). */
  allowed?: number;
  pass: boolean;
}

export type CheckStatus = 'pass' | 'fail' | 'not-run';

export interface CheckResult {
  id: string;
  part: string;
  title: string;
  purpose: string;
  source: string;
  reference: { file: string; sha256: string | null };
  /** The tolerance in words, made from the values in suite.json. */
  tolerance: string;
  toleranceValues: ToleranceValues;
  /** One line: the value found (e.g. the largest error) against the limit. */
  found: string;
  status: CheckStatus;
  rows: CheckRow[];
  durationMs: number;
  /** Why the check could not complete (an exception counts as a failure). */
  error?: string;
}

export interface MachineInfo {
  os: string;
  platform: string;
  release: string;
  arch: string;
  hostname: string;
  cpuModel: string;
  cores: number;
  memoryGiB: number;
  node: string;
}

export interface EngineFingerprint {
  /** Folder whose files were hashed. */
  directory: string;
  /** Which files: `*.js` of the installed build (or `*.ts` when run from the source tree). */
  pattern: string;
  fileCount: number;
  sha256: string;
  /** The shell command that recomputes the hash on the installed files. */
  recompute: string;
}

export interface VerificationReport {
  format: 'plateau-verification-report/1';
  title: string;
  scope: string;
  status: 'PASS' | 'FAIL';
  mode: 'quick' | 'full';
  startedAt: string;
  finishedAt: string;
  durationMs: number;
  application: { name: string; version: string; engineVersion: string };
  engine: EngineFingerprint;
  validationSet: { directory: string; files: { path: string; sha256: string }[] };
  machine: MachineInfo;
  summary: { total: number; passed: number; failed: number; notRun: number };
  checks: CheckResult[];
  signOff: string[];
}

export interface VerifyProgress {
  /** 1-based position of the check in this run, of `total`. */
  index: number;
  total: number;
  id: string;
  title: string;
  phase: 'start' | 'done';
  status?: CheckStatus;
  durationMs?: number;
}
