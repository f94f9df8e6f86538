/** `plateau fit`: population fit by SAEM from the command line. */
import { formatFitSummary } from '../../../engine/saem/fitRecord.js';
import { ModelDataError } from '../../../engine/stats/model.js';
import { fitFromFiles } from '../../services/fitService.js';
import { addPosthoc, formatPosthocSummary } from '../../services/fitPosthoc.js';
import { booleanFlag, numberFlag, parseArgs, stringFlag } from '../args.js';
import { resolvePath, writeFileAtomic } from '../../services/files.js';
import { CliError, type CliCommand } from '../types.js';

const usage = `usage: plateau fit --data <canonical.csv|spreadsheet> --model <spec.json> [--mapping <template.json>]
                  [--seed N] [--out fit.json] [--progress] [--repeat K]

Fits the population model in <spec.json> to the dataset by SAEM (maximum likelihood) and prints
a summary. The spec's "estimation" block holds the estimator settings; --seed overrides its seed.
  --data      levels and doses (canonical CSV, or a spreadsheet with --mapping)
  --model     model spec (JSON)
  --mapping   column-mapping template for a spreadsheet export
  --seed      random seed (integer >= 0); same data, model and seed give identical results
  --out       write the fit result (JSON) to this file
  --progress  print the estimates every 10 iterations to stderr
  --repeat    also run the fit K times in all (K >= 2) from different seeds and jittered initial
              values and report whether the estimates agree (robustness check)

After the fit: standard errors, -2LL (importance sampling), AIC, BIC, individual conditional
distributions, shrinkage and diagnostics (NPDE, VPC) are computed and written to fit.json.`;

export const command: CliCommand = {
  name: 'fit',
  summary: 'fit a population PK model to a dataset by SAEM',
  usage,
  async run(argv, io, signal) {
    const args = parseArgs(
      argv,
      {
        data: { type: 'string', required: true },
        model: { type: 'string', required: true },
        mapping: { type: 'string' },
        seed: { type: 'string' },
        out: { type: 'string', short: 'o' },
        progress: { type: 'boolean' },
        repeat: { type: 'string' },
      },
      { usage },
    );
    if (args.help) {
      io.stdout(`${usage}\n`);
      return 0;
    }
    const seed = numberFlag(args, 'seed', { integer: true, usage });
    if (seed !== undefined && seed < 0) throw new CliError(`--seed must be an integer >= 0, got ${seed}`);
    const repeat = numberFlag(args, 'repeat', { integer: true, usage });
    if (repeat !== undefined && repeat < 2) throw new CliError(`--repeat must be an integer >= 2 (the number of fits in all), got ${repeat}`);
    const progress = booleanFlag(args, 'progress');
    const mapping = stringFlag(args, 'mapping');
    let outcome;
    try {
      outcome = await fitFromFiles({
        dataPath: resolvePath(io.cwd, stringFlag(args, 'data')!),
        modelPath: resolvePath(io.cwd, stringFlag(args, 'model')!),
        ...(mapping !== undefined ? { mappingPath: resolvePath(io.cwd, mapping) } : {}),
        ...(seed !== undefined ? { seed } : {}),
        ...(signal ? { signal } : {}),
        ...(progress
          ? {
              onProgress: (p) => {
                if (p.iteration % 10 !== 0 && p.iteration !== p.explorationEnd) return;
                const est = p.estimateNames.map((n, q) => `${n}=${p.estimates[q].toPrecision(4)}`).join(' ');
                io.stderr(`[${p.phase} ${p.iteration}/${p.plannedIterations}] ${est}\n`);
                // Let the event loop breathe so a cancellation can arrive.
                return new Promise<void>((resolve) => setImmediate(resolve));
              },
            }
          : {}),
      });
    } catch (e) {
      if (e instanceof ModelDataError) throw new CliError(`${e.message}\nFix the model spec or the data and run the command again.`);
      if (e instanceof Error && e.name === 'AbortError') throw new CliError(e.message);
      throw e;
    }
    io.stdout(`${formatFitSummary(outcome.record)}\n`);
    const record = await addPosthoc(outcome, {
      ...(repeat !== undefined ? { repeat } : {}),
      ...(signal ? { repeatOptions: { signal } } : {}),
      ...(progress ? { onStatus: (m: string) => io.stderr(`[${m}]\n`) } : {}),
    });
    io.stdout(`${formatPosthocSummary(record)}\n`);
    const out = stringFlag(args, 'out');
    if (out !== undefined) {
      const file = resolvePath(io.cwd, out);
      await writeFileAtomic(file, `${JSON.stringify(record, null, 1)}\n`);
      io.stdout(`\nwrote ${file}\n`);
    }
    return 0;
  },
};
