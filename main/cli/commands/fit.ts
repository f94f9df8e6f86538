/**
 * `plateau fit`: population fit by SAEM from the command line. Each seed runs in a heap-limited
 * job thread of this process (main/worker/jobThreads.ts, main/services/seedThreads.ts), the job an
 * engine worker process runs, without starting one: this process is already the supervised
 * command child (main/cli/plateau.ts), its main thread stays free for Ctrl-C, and a cancel ends
 * the threads at once. The first thread starts before the fit's modules load and the inputs are
 * read, so its start overlaps that work.
 */
import * as path from 'node:path';
import { CoreSlots, machineCores } from '../../services/coreSlots.js';
import { SEEDS_MAX, SEEDS_MIN } from '../../services/seedBounds.js';
import { checkOutputPath, readJsonFile, resolvePath, writeFileAtomic } from '../../services/files.js';
import type { SeedProgress } from '../../services/fitSeeds.js';
import { booleanFlag, numberFlag, parseArgs, stringFlag } from '../args.js';
import { cliServiceRoots } from '../run.js';
import { CliError, type CliCommand } from '../types.js';
import { DEFAULT_JOB_HEAP_MB, DEFAULT_JOB_TIME_LIMIT_MS, JobThreads } from '../../worker/jobThreads.js';

const usage = `usage: plateau fit --data <canonical.csv|spreadsheet> --model <spec.json> [--mapping <template.json>]
                  [--seed N] [--seeds K] [--out fit.json] [--progress]

Fits the population model in <spec.json> to the dataset by SAEM (maximum likelihood) and prints
a summary. The spec's "estimation" block holds the estimator settings; --seed overrides its seed.
  --data      levels and doses (canonical CSV, or a spreadsheet with --mapping)
  --model     model spec (JSON)
  --mapping   column-mapping template for a spreadsheet export
  --seed      first random seed (integer 0..2^53-1; default the spec's, else 1); same data, model
              and seeds give identical results
  --seeds     how many seeds to run (integer ${SEEDS_MIN}..${SEEDS_MAX}; default the spec's estimation.seeds, else 3):
              the fit runs from seeds N, N+1, ..., reports whether they agree and keeps the one
              with the lowest importance-sampling -2LL; --seeds 1 runs one seed only
  --out       write the fit result (JSON) to this file
  --progress  print each seed's phase, iteration and estimates to stderr (about once a second)

The seeds run in parallel threads, as many at once as the machine has cores.
Each seed's fit is followed by standard errors, -2LL (importance sampling), AIC, BIC, individual
conditional distributions and shrinkage, and the kept seed's by diagnostics (NPDE, VPC); the kept
fit is written to fit.json with the seeds' verdict ("seeds") and its degeneracy checks ("degeneracy").`;

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
        seeds: { type: 'string' },
      },
      { usage },
    );
    if (args.help) {
      io.stdout(`${usage}\n`);
      return 0;
    }
    const seed = numberFlag(args, 'seed', { integer: true, usage });
    if (seed !== undefined && (seed < 0 || seed > 2 ** 53 - 1)) throw new CliError(`--seed must be an integer in [0, 2^53-1], got ${seed}`);
    const seeds = numberFlag(args, 'seeds', { integer: true, usage });
    if (seeds !== undefined && (seeds < SEEDS_MIN || seeds > SEEDS_MAX)) throw new CliError(`--seeds must be an integer in [${SEEDS_MIN}, ${SEEDS_MAX}], got ${seeds}`);
    const progress = booleanFlag(args, 'progress');
    const mapping = stringFlag(args, 'mapping');
    const out = stringFlag(args, 'out');
    const outFile = out !== undefined ? resolvePath(io.cwd, out) : undefined;
    const cores = machineCores();
    // Checked before any worker starts: a fit of minutes must not end in "cannot write".
    if (outFile !== undefined) await checkOutputPath(outFile);
    // The engine worker process's default limits: heap per job and wall-clock time.
    const jobs = new JobThreads({ heapMb: DEFAULT_JOB_HEAP_MB, timeLimitMs: DEFAULT_JOB_TIME_LIMIT_MS, entry: path.join(path.dirname(cliServiceRoots().workerEntry), 'jobThread.js') });
    jobs.ahead(1);
    let modules;
    try {
      modules = await Promise.all([
        import('../../../engine/saem/fitRecord.js'),
        import('../../../engine/stats/model.js'),
        import('../../../engine/spec/modelSpec.js'),
        import('../../../engine/saem/settings.js'),
        import('../../services/fitService.js'),
        import('../../services/fitPosthoc.js'),
        import('../../services/seedThreads.js'),
        import('../../services/fitSeeds.js'),
      ]);
    } catch (e) {
      jobs.close();
      throw e;
    }
    const [{ formatFitSummary }, { compileModel, ModelDataError }, { parseModelSpec }, { parseSaemSettings }, { readDataset }, { formatPosthocSummary }, { addDiagnosticsInThreads, runSeedInThreads }, { fitSeeds, formatSeeds, seedsAtOnce }] = modules;
    let record;
    try {
      const dataset = await readDataset(resolvePath(io.cwd, stringFlag(args, 'data')!), mapping !== undefined ? resolvePath(io.cwd, mapping) : undefined);
      const specJson = (await readJsonFile(resolvePath(io.cwd, stringFlag(args, 'model')!))) as Record<string, unknown>;
      const spec = parseModelSpec(specJson);
      compileModel(spec, dataset); // the model must match the data before any seed is sent
      const settings = { ...(seed !== undefined ? { seed } : {}), ...(seeds !== undefined ? { seeds } : {}) };
      // A thread for each seed that runs at once (fitSeeds' rule); a thread whose seed is done runs the next.
      const atOnce = seedsAtOnce(parseSaemSettings(spec.estimation, settings).seeds, cores);
      jobs.setMaxIdle(atOnce);
      jobs.ahead(atOnce);
      const lastPrinted = new Map<number, { atMs: number; phase: string }>();
      record = await fitSeeds(dataset, spec, {
        settings,
        runOne: runSeedInThreads(dataset, { specJson, settings, jobs }),
        addDiagnostics: addDiagnosticsInThreads(dataset, { specJson, settings, jobs }),
        slots: new CoreSlots(cores),
        ...(signal ? { signal } : {}),
        ...(progress
          ? {
              onStatus: (m: string) => io.stderr(`[${m}]\n`),
              onProgress: (s: number, p: SeedProgress) => {
                const last = lastPrinted.get(s);
                const now = Date.now();
                if (last && last.phase === p.phase && now - last.atMs < 1000) return;
                lastPrinted.set(s, { atMs: now, phase: p.phase });
                const est = Object.entries(p.estimates).map(([n, x]) => `${n}=${x.toPrecision(4)}`).join(' ');
                io.stderr(`[seed ${s} ${p.phase} ${p.iteration}/${p.maxIterations}] ${p.message ?? est}\n`);
              },
            }
          : {}),
      });
    } catch (e) {
      if (e instanceof ModelDataError) throw new CliError(`${e.message}\nFix the model spec or the data and run the command again.`);
      if (e instanceof Error && e.name === 'AbortError') throw new CliError(e.message);
      throw e;
    } finally {
      // Every job thread ends with the fit.
      jobs.close();
    }
    io.stdout(`${formatFitSummary(record, formatSeeds(record.seeds))}\n`);
    io.stdout(`${formatPosthocSummary(record)}\n`);
    if (outFile !== undefined) {
      await writeFileAtomic(outFile, `${JSON.stringify(record, null, 1)}\n`);
      io.stdout(`\nwrote ${outFile}\n`);
    }
    return 0;
  },
};
