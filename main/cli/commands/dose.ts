/** `plateau dose`: Bayesian dose individualisation for one patient. */
import { formatAdvice } from '../../../engine/dosing/report.js';
import { parseRegimen, RegimenParseError } from '../../../engine/dosing/regimens.js';
import { listTargetPresets, loadModelFile, loadPatientFile, loadTarget, runDoseAdvice } from '../../services/doseService.js';
import { booleanFlag, numberFlag, parseArgs, stringFlag } from '../args.js';
import { resolvePath, writeFileAtomic } from '../io.js';
import { UsageError, type CliCommand } from '../types.js';

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
  --seed N              seed of the posterior draws (default 1); same seed, same advice
  --evaluate "<text>"   evaluate one regimen, e.g. "1000mg q12h 1h", "1g q24h 30min",
                        "load 2000mg 1000mg q12h 2h", "500mg q8h bolus"
  --draws N             posterior draws (default 2000)
  --mic X               MIC (mg/L) for the target's per-MIC bounds (overrides the preset's)
  --peak-after H        also report the level H hours after the end of infusion (peakAt)
  --next-dose-h H       start of the next dose, hours from the first dose (overrides the file)
  --loading-dose        suggest a loading dose with every candidate
  --below X             report when the level falls below X mg/L after the last given dose
  --override-blocks     show the regimens even when a check blocks the advice (marked as blocked)
  --json                print the advice JSON instead of the text report
Exit status: 0 advice given, 1 error or advice blocked, 2 bad usage.`;

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
    const args = parseArgs(argv, specs, { usage });
    const seed = numberFlag(args, 'seed', { integer: true, usage }) ?? 1;
    const draws = numberFlag(args, 'draws', { integer: true, usage });
    if (draws !== undefined && !(draws >= 100 && draws <= 100_000)) throw new UsageError('--draws must be between 100 and 100000', usage);
    const mic = numberFlag(args, 'mic', { usage });
    if (mic !== undefined && !(mic > 0)) throw new UsageError('--mic must be > 0 (mg/L)', usage);
    const below = numberFlag(args, 'below', { usage });
    if (below !== undefined && !(below > 0)) throw new UsageError('--below must be > 0 (mg/L)', usage);
    const peakAfter = numberFlag(args, 'peak-after', { usage });
    if (peakAfter !== undefined && !(peakAfter >= 0)) throw new UsageError('--peak-after must be >= 0 (hours after the end of infusion)', usage);
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
    const population = await loadModelFile(resolvePath(io.cwd, stringFlag(args, 'model')!));
    const patient = await loadPatientFile(resolvePath(io.cwd, stringFlag(args, 'patient')!));
    if (nextDoseH !== undefined) {
      const last = patient.doses[patient.doses.length - 1];
      if (nextDoseH < last.timeH + last.durationH) throw new UsageError(`--next-dose-h ${nextDoseH} is before the last dose has finished (${last.timeH + last.durationH} h)`, usage);
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
    if (advice.status === 'blocked') {
      io.stderr('plateau: dose advice blocked by the checks above (use --override-blocks to see the regimens anyway)\n');
      return 1;
    }
    return 0;
  },
};
