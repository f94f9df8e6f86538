/** `plateau simulate`: predicted concentrations for a dataset under a model spec. */
import * as path from 'node:path';
import { writeCanonicalCsv } from '../../../engine/data/canonicalCsv.js';
import { parseModelSpec } from '../../../engine/spec/modelSpec.js';
import { parseSaemSettings } from '../../../engine/saem/settings.js';
import { loadDataset } from '../../services/datasetLoader.js';
import { booleanFlag, numberFlag, parseArgs, stringFlag } from '../args.js';
import { checkOutputPath, readJsonFile, resolvePath, writeFileAtomic } from '../../services/files.js';
import { gridPointCount, MAX_TOTAL_GRID_POINTS, parseTimeGrid, simulateDataset, type TimeGrid } from '../simulation.js';
import { printable } from '../../../engine/text/printable.js';
import { UsageError, type CliCommand } from '../types.js';

const usage = `Usage: plateau simulate --model <spec.json> --data <file> [--mapping <template.json>] [--times start:step:end]
                        [--variability --seed N] [--out <file.csv|file.json>]

Predicts each subject's concentrations at its level times from the model spec: typical values
from the spec and the subject's covariates; a data column named like a parameter (e.g. CL)
gives that subject's own value.
  --model <file>       model spec (JSON; see README, "Model spec")
  --data <file>        dataset: canonical CSV, or a spreadsheet (.xlsx, .xls, .ods)
  --mapping <file>     spreadsheet mapping template (see plateau check)
  --times a:step:b     also predict on a time grid, hours from each subject's first event
                       (written as level rows with grid = 1); at most 1,000,000 points per
                       subject and 2,000,000 over all subjects
  --variability        draw between-subject (bsv, correlations) and residual variability;
                       levels below their LLOQ come out censored
  --seed N             seed for --variability, an integer from 0 to 4294967295 (default 1);
                       same seed, same result
  --out <file>         .csv (canonical CSV, conc_mg_L filled) or .json; default: CSV to stdout
                       (on stdout, control characters in ids are shown escaped, e.g. \\x1b)`;

const specs = {
  model: { type: 'string', required: true },
  data: { type: 'string', required: true },
  mapping: { type: 'string' },
  times: { type: 'string' },
  seed: { type: 'string' },
  variability: { type: 'boolean' },
  out: { type: 'string', short: 'o' },
} as const;

/**
 * CSV text with control characters escaped inside fields; the line breaks between rows (outside
 * quotes) are kept, so the output stays one row per line.
 */
function escapeCsvText(text: string): string {
  let out = '';
  let quoted = false;
  for (const ch of text) {
    if (ch === '"') quoted = !quoted;
    out += !quoted && ch === '\n' ? ch : printable(ch);
  }
  return out;
}

export const command: CliCommand = {
  name: 'simulate',
  summary: 'Predict concentrations for a dataset under a model spec (optionally on a time grid)',
  usage,
  async run(argv, io) {
    const args = parseArgs(argv, specs, { usage });
    let grid: TimeGrid | undefined;
    const timesText = stringFlag(args, 'times');
    if (timesText !== undefined) {
      try {
        grid = parseTimeGrid(timesText);
      } catch (e) {
        throw new UsageError((e as Error).message, usage);
      }
    }
    const seed = numberFlag(args, 'seed', { integer: true, min: 0, max: 4294967295, usage });
    const variability = booleanFlag(args, 'variability');
    if (seed !== undefined && !variability) io.stderr('plateau: note: --seed has no effect without --variability (typical predictions have no randomness)\n');
    const out = stringFlag(args, 'out');
    const format = out === undefined ? 'csv' : path.extname(out).toLowerCase();
    if (format !== 'csv' && format !== '.csv' && format !== '.json') throw new UsageError(`--out must end in .csv or .json, got "${out}"`, usage);

    // The output path is checked before the work, so a typo does not cost the whole run.
    if (out !== undefined) await checkOutputPath(resolvePath(io.cwd, out));
    const specFile = resolvePath(io.cwd, stringFlag(args, 'model')!);
    const spec = parseModelSpec(await readJsonFile(specFile));
    // The estimation block is not used here, but a wrong one is named now rather than at fit time.
    parseSaemSettings(spec.estimation);
    const dataFile = resolvePath(io.cwd, stringFlag(args, 'data')!);
    const mapping = stringFlag(args, 'mapping');
    const dataset = await loadDataset(dataFile, mapping !== undefined ? { mapping: resolvePath(io.cwd, mapping) } : {});
    if (grid && gridPointCount(grid) * dataset.subjects.length > MAX_TOTAL_GRID_POINTS)
      throw new UsageError(`--times ${timesText}: ${gridPointCount(grid)} points for each of ${dataset.subjects.length} subjects is more than ${MAX_TOTAL_GRID_POINTS} in all; use a larger step or a shorter span`, usage);
    const result = simulateDataset(spec, dataset, { ...(grid ? { grid } : {}), variability, ...(seed !== undefined ? { seed } : {}) });

    let text: string;
    if (format === '.json') {
      text = `${JSON.stringify(
        {
          model: { structure: spec.structure, ...(spec.name ? { name: spec.name } : {}) },
          ...(variability ? { seed: seed ?? 1 } : {}),
          subjects: result.subjects.map((s, i) => {
            const subject = result.output.subjects[i];
            return {
              id: s.id,
              parameters: s.parameters,
              parameterSource: s.parameterSource,
              levels: dataset.subjects.find((d) => d.id === s.id)!.observations.map((o, k) => ({
                timeH: o.timeH,
                predictedMgL: s.predictedMgL[k],
                ...(s.simulatedMgL ? { simulatedMgL: s.simulatedMgL[k], censored: subject.observations[k].censored } : {}),
                observedMgL: o.valueMgL,
                observedCensored: o.censored,
              })),
              ...(s.gridTimesH ? { grid: Array.from(s.gridTimesH, (t, k) => ({ timeH: t, predictedMgL: s.gridMgL![k] })) } : {}),
            };
          }),
        },
        null,
        2,
      )}\n`;
    } else {
      const gridMap = new Map<string, { timesH: Float64Array; concMgL: Float64Array }>();
      for (const s of result.subjects) if (s.gridTimesH && s.gridMgL) gridMap.set(s.id, { timesH: s.gridTimesH, concMgL: s.gridMgL });
      text = writeCanonicalCsv(result.output, gridMap.size ? { grid: gridMap } : {});
    }

    if (out === undefined) {
      // A terminal must not receive raw control characters from an id (escape codes, a CR-LF
      // that forges a line); --out keeps the file exact.
      const shown = escapeCsvText(text);
      if (shown !== text) io.stderr('plateau: note: control characters in ids or values are shown escaped on stdout (e.g. \\x1b); use --out to write them unchanged\n');
      io.stdout(shown);
      return 0;
    }
    const outFile = resolvePath(io.cwd, out);
    await writeFileAtomic(outFile, text);
    const levels = result.subjects.reduce((n, s) => n + s.predictedMgL.length, 0);
    const gridPoints = result.subjects.reduce((n, s) => n + (s.gridTimesH?.length ?? 0), 0);
    io.stdout(
      `simulated ${result.subjects.length} subject(s) with ${result.model.id}: ${levels} level(s)${gridPoints ? `, ${gridPoints} grid point(s)` : ''}${variability ? `, variability seed ${seed ?? 1}` : ''} -> ${printable(out)}\n`,
    );
    return 0;
  },
};
