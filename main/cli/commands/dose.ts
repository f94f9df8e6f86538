/** `plateau dose`: Bayesian dose individualisation for one patient. */
import { formatAdvice } from '../../../engine/dosing/report.js';
import { parseRegimen, RegimenParseError } from '../../../engine/dosing/regimens.js';
import { ENGINE_VERSION } from '../../../engine/version.js';
import { listTargetPresets, loadCaution, loadModelFile, loadPatientFile, loadTarget, runDoseAdvice } from '../../services/doseService.js';
import { booleanFlag, numberFlag, parseArgs, stringFlag } from '../args.js';
import { checkOutputPath, resolvePath, writeFileAtomic } from '../../services/files.js';
import { UsageError, type CliCommand, type CliIo } from '../types.js';

const usage = `Usage: plateau dose --model <fit.json|model.json> --patient <patient.json> [--target <preset|target.json>]
                    [--out advice.json] [--seed N] [--evaluate "1000mg q12h 1h"] [--draws N]
                    [--mic X] [--peak-after H] [--next-dose-h H] [--loading-dose] [--below X]
                    [--override-blocks] [--json]

Combines a population model with one patient's doses and levels: the patient's posterior (MAP
and MCMC draws), forecast metrics with credible bands, and candidate regimens ranked by the
probability of reaching the target and of toxic exposure. Always printed with the caution text.
  --model <file>        a site fit (fit.json from plateau fit) or a model spec (JSON) whose
                        typical, bsv, covariate and residual values are the population values
  --patient <file>      patient.json: covariates, dose history, levels (see README, "patient.json")
  --target <preset|file> a target preset or your own target file; without it the current regimen
                        is evaluated and nothing is ranked. Presets: vancomycin-auc24,
                        aminoglycoside-peak-mic, beta-lactam-ft-mic (resources/targets)
  --out <file>          write the advice as JSON
  --seed N              seed of the posterior draws, 0 to 4294967295 (default 1); same seed, same advice
  --evaluate "<text>"   evaluate one regimen, e.g. "1000mg q12h 1h", "1g q24h 30min",
                        "load 2000mg 1000mg q12h 2h", "500mg q8h bolus"
  --draws N             posterior draws, 100 to 100000 (default 2000)
  --mic X               MIC (mg/L, > 0 to 1024) for the target's per-MIC bounds (overrides the preset's)
  --peak-after H        also report the level H hours (0-24) after the end of infusion (peakAt)
  --next-dose-h H       start of the next dose, hours from the first dose (overrides the file;
                        from the end of the last dose to 720 h after it)
  --loading-dose        a loading dose where indicated: no drug on board or levels far below,
                        so that the first peak reaches the steady-state peak (each regimen says
                        what was decided); never when the exposure now is above a toxic limit
  --below X             report when the level falls below X mg/L (> 0 to 2000) after the last
                        given dose; also the level a hold waits for
  --override-blocks     show the regimens even when a check blocks the advice (marked as blocked)
  --json                print the advice JSON instead of the text report
Bounds: a target's regimen settings must keep strengthMg 0.1-10000 mg, doses 0.1-20000 mg,
at most 400 dose steps ((maxDoseMg - minDoseMg) / strengthMg + 1), 1-12 intervals of 1-168 h,
1-8 infusion durations of 0.05-24 h; work beyond them is refused before it starts.
Exit status: 0 advice given, 1 error or advice blocked (also when --override-blocks shows it),
2 bad usage.`;

/** The next dose at most this long after the last one (30 days): beyond it the history is stale. */
const MAX_NEXT_DOSE_DELAY_H = 720;

const specs = {
  model: { type: 'string', required: true },
  patient: { type: 'string', required: true },
  target: { type: 'string' },
  out: { type: 'string', short: 'o' },
  seed: { type: 'string' },
  evaluate: { type: 'string' },
  draws: { type: 'string' },
  mic: { type: 'string' },
  'loading-dose': { type: 'boolean' },
  below: { type: 'string' },
  'peak-after': { type: 'string' },
  'next-dose-h': { type: 'string' },
  'override-blocks': { type: 'boolean' },
  json: { type: 'boolean' },
} as const;

export const command: CliCommand = {
  name: 'dose',
  summary: 'Bayesian dose individualisation for one patient (posterior, forecast, ranked regimens)',
  usage,
  async run(argv, io) {
    // Every exit path carries the caution: on failure it is printed (and the JSON error record
    // written with --out / --json) before the error goes to the runner.
    const outputs: { out?: string; json: boolean } = { json: argv.includes('--json'), ...outFromArgv(argv) };
    try {
      return await runDose(argv, io, outputs);
    } catch (e) {
      await reportFailure(e, io, outputs);
      throw e;
    }
  },
};

/** --out from the raw arguments, for when they do not parse. */
function outFromArgv(argv: readonly string[]): { out?: string } {
  for (let i = 0; i < argv.length; i++) {
    if ((argv[i] === '--out' || argv[i] === '-o') && argv[i + 1] !== undefined && !argv[i + 1].startsWith('-')) return { out: argv[i + 1] };
    if (argv[i].startsWith('--out=')) return { out: argv[i].slice(6) };
  }
  return {};
}

/** The error's own list of problems when it has one, else its message. */
function errorList(e: unknown): string[] {
  const problems = (e as { problems?: unknown }).problems;
  if (Array.isArray(problems) && problems.length)
    return problems.map((p) => (typeof p === 'string' ? p : typeof p === 'object' && p !== null && 'message' in p ? `${'line' in p ? `line ${String((p as { line: unknown }).line)}: ` : ''}${String((p as { message: unknown }).message)}` : JSON.stringify(p)));
  return [e instanceof Error ? e.message : String(e)];
}

async function reportFailure(e: unknown, io: CliIo, outputs: { out?: string; json: boolean }): Promise<void> {
  let caution: string;
  try {
    caution = await loadCaution();
  } catch (c) {
    caution = `(the caution text could not be loaded: ${(c as Error).message})`;
  }
  const record = { status: 'error' as const, caution, errors: errorList(e), engineVersion: ENGINE_VERSION };
  const json = `${JSON.stringify(record, null, 2)}\n`;
  if (outputs.out !== undefined) {
    try {
      await writeFileAtomic(resolvePath(io.cwd, outputs.out), json);
    } catch (w) {
      io.stderr(`plateau: could not write the error record to ${outputs.out}: ${(w as Error).message}\n`);
    }
  }
  if (outputs.json) io.stdout(json);
  io.stderr(`${caution}\n\nplateau: no dose advice: the command failed (reason below)\n`);
}

async function runDose(argv: readonly string[], io: CliIo, outputs: { out?: string; json: boolean }): Promise<number> {
  const args = parseArgs([...argv], specs, { usage });
  if (args.help) {
    io.stdout(`${usage}\n`);
    return 0;
  }
  outputs.out = stringFlag(args, 'out');
  outputs.json = booleanFlag(args, 'json');
  const seed = numberFlag(args, 'seed', { integer: true, min: 0, max: 4294967295, usage }) ?? 1;
  const draws = numberFlag(args, 'draws', { integer: true, usage });
  if (draws !== undefined && !(draws >= 100 && draws <= 100_000)) throw new UsageError('--draws must be between 100 and 100000', usage);
  const mic = numberFlag(args, 'mic', { usage });
  if (mic !== undefined && !(mic > 0 && mic <= 1024)) throw new UsageError('--mic must be a number > 0 and at most 1024 (mg/L)', usage);
  const below = numberFlag(args, 'below', { usage });
  if (below !== undefined && !(below > 0 && below <= 2000)) throw new UsageError('--below must be a number > 0 and at most 2000 (mg/L)', usage);
  const peakAfter = numberFlag(args, 'peak-after', { usage });
  if (peakAfter !== undefined && !(peakAfter >= 0 && peakAfter <= 24)) throw new UsageError('--peak-after must be from 0 to 24 (hours after the end of infusion)', usage);
  const nextDoseH = numberFlag(args, 'next-dose-h', { usage });
  let evaluate;
  const evalText = stringFlag(args, 'evaluate');
  if (evalText !== undefined) {
    try {
      evaluate = parseRegimen(evalText);
    } catch (e) {
      if (e instanceof RegimenParseError) throw new UsageError(e.message, usage);
      throw e;
    }
  }
  // The output path is checked before the work (the error record then goes nowhere: stderr says why).
  if (outputs.out !== undefined) await checkOutputPath(resolvePath(io.cwd, outputs.out));
  const population = await loadModelFile(resolvePath(io.cwd, stringFlag(args, 'model')!));
  const patient = await loadPatientFile(resolvePath(io.cwd, stringFlag(args, 'patient')!));
  if (nextDoseH !== undefined) {
    const last = patient.doses[patient.doses.length - 1];
    if (nextDoseH < last.timeH + last.durationH) throw new UsageError(`--next-dose-h ${nextDoseH} is before the last dose has finished (${last.timeH + last.durationH} h)`, usage);
    if (nextDoseH > last.timeH + MAX_NEXT_DOSE_DELAY_H) throw new UsageError(`--next-dose-h ${nextDoseH} is more than ${MAX_NEXT_DOSE_DELAY_H} h after the last dose (${last.timeH} h): the history no longer describes the patient then`, usage);
    patient.nextDoseH = nextDoseH;
  }
  const targetName = stringFlag(args, 'target');
  let target = targetName !== undefined ? await loadTarget(targetName, io.cwd) : undefined;
  if (target && mic !== undefined) target = { ...target, micMgL: mic };
  else if (!target && mic !== undefined) throw new UsageError('--mic needs --target', usage);
  if (target && peakAfter !== undefined) target = { ...target, peakDelayH: peakAfter };
  else if (!target && peakAfter !== undefined) throw new UsageError('--peak-after needs --target', usage);
  if (!target && targetName === undefined && evaluate === undefined)
    io.stderr(`plateau: no --target: evaluating the current regimen only (presets: ${(await listTargetPresets()).join(', ')})\n`);

  const advice = await runDoseAdvice({
    population,
    patient,
    ...(target ? { target } : {}),
    seed,
    ...(evaluate ? { evaluate } : {}),
    ...(draws !== undefined ? { nDraws: draws } : {}),
    loadingDose: booleanFlag(args, 'loading-dose'),
    ...(below !== undefined ? { belowMgL: below } : {}),
    overrideBlocks: booleanFlag(args, 'override-blocks'),
  });
  const json = `${JSON.stringify(advice, null, 2)}\n`;
  const out = stringFlag(args, 'out');
  if (out !== undefined) await writeFileAtomic(resolvePath(io.cwd, out), json);
  io.stdout(booleanFlag(args, 'json') ? json : formatAdvice(advice));
  // Blocked advice exits 1 whether or not --override-blocks shows its regimens.
  if (advice.status === 'blocked') {
    io.stderr('plateau: dose advice blocked by the checks above (use --override-blocks to see the regimens anyway)\n');
    return 1;
  }
  if (advice.status === 'blocked-shown-on-request') {
    io.stderr('plateau: dose advice BLOCKED by the checks above; the regimens were shown on request only (--override-blocks)\n');
    return 1;
  }
  return 0;
}
