/**
 * Benchmark runner (`npm run bench`): loads every *.bench.js beside this file, runs each suite in
 * turn and prints its figures. Figures only, never pass/fail: a failing suite prints its error
 * and the runner goes on; the exit code is 0.
 *   npm run bench -- --json          JSON only on stdout
 *   npm run bench -- --only <suite>  run the named suite(s) (repeatable; file or suite name)
 */
import { promises as fs } from 'node:fs';
import * as os from 'node:os';
import * as path from 'node:path';
import { fileURLToPath, pathToFileURL } from 'node:url';

export interface BenchFigure {
  name: string;
  value: number;
  unit: string;
  /** The figure we aim for, as text (e.g. ">= 1e7"). */
  target?: string;
  note?: string;
}

export interface BenchSuite {
  name: string;
  run: () => Promise<BenchFigure[]>;
}

export interface SuiteResult {
  suite: string;
  file: string;
  figures: BenchFigure[];
  error?: string;
  seconds: number;
}

interface RunnerOptions {
  json: boolean;
  only: string[];
}

function parseRunnerArgs(argv: readonly string[]): RunnerOptions {
  const options: RunnerOptions = { json: false, only: [] };
  for (let i = 0; i < argv.length; i++) {
    const a = argv[i];
    if (a === '--json') options.json = true;
    else if (a === '--only') {
      const v = argv[++i];
      if (v === undefined) throw new Error('--only needs a suite name');
      options.only.push(v);
    } else if (a.startsWith('--only=')) options.only.push(a.slice('--only='.length));
    else if (a === '--help' || a === '-h') {
      process.stdout.write('usage: npm run bench -- [--json] [--only <suite>]...\n');
      process.exit(0);
    } else throw new Error(`unknown option ${a} (use --json, --only <suite>)`);
  }
  return options;
}

/** Format a figure with about 4 significant digits and thousands kept readable. */
export function formatValue(value: number): string {
  if (!Number.isFinite(value)) return String(value);
  const abs = Math.abs(value);
  if (abs !== 0 && (abs >= 1e9 || abs < 1e-3)) return value.toExponential(3);
  if (abs >= 1000) return Math.round(value).toLocaleString('en-US');
  return Number(value.toPrecision(4)).toString();
}

/** Aligned plain-text table of all results. */
export function formatTable(results: readonly SuiteResult[]): string {
  const rows: string[][] = [['suite', 'figure', 'value', 'unit', 'target', 'note']];
  for (const r of results) {
    if (r.error !== undefined) rows.push([r.suite, '(failed)', '', '', '', r.error.split('\n')[0]]);
    for (const f of r.figures) rows.push([r.suite, f.name, formatValue(f.value), f.unit, f.target ?? '', f.note ?? '']);
  }
  const widths = rows[0].map((_, c) => Math.max(...rows.map((row) => row[c].length)));
  const line = (row: string[]) =>
    row
      .map((cell, c) => (c === 2 ? cell.padStart(widths[c]) : cell.padEnd(widths[c])))
      .join('  ')
      .trimEnd();
  return [line(rows[0]), widths.map((w) => '-'.repeat(w)).join('  '), ...rows.slice(1).map(line)].join('\n') + '\n';
}

function isSuite(x: unknown): x is BenchSuite {
  const s = x as BenchSuite;
  return typeof s === 'object' && s !== null && typeof s.name === 'string' && typeof s.run === 'function';
}

export async function runBenchmarks(dir: string, options: RunnerOptions, log: (text: string) => void): Promise<SuiteResult[]> {
  const files = (await fs.readdir(dir)).filter((f) => f.endsWith('.bench.js')).sort();
  const results: SuiteResult[] = [];
  for (const file of files) {
    const base = file.replace(/\.bench\.js$/, '');
    const started = performance.now();
    let suiteName = base;
    try {
      const mod = (await import(pathToFileURL(path.join(dir, file)).href)) as { suite?: unknown };
      if (!isSuite(mod.suite)) throw new Error(`${file} does not export \`suite\` ({name, run})`);
      suiteName = mod.suite.name;
      if (options.only.length && !options.only.includes(suiteName) && !options.only.includes(base)) continue;
      log(`running ${suiteName} ...\n`);
      const figures = await mod.suite.run();
      if (!Array.isArray(figures)) throw new Error('run() did not return an array of figures');
      results.push({ suite: suiteName, file, figures, seconds: (performance.now() - started) / 1000 });
    } catch (e) {
      if (options.only.length && !options.only.includes(suiteName) && !options.only.includes(base)) continue;
      const message = e instanceof Error ? (e.stack ?? e.message) : String(e);
      results.push({ suite: suiteName, file, figures: [], error: message, seconds: (performance.now() - started) / 1000 });
    }
  }
  return results;
}

async function main(): Promise<void> {
  let options: RunnerOptions;
  try {
    options = parseRunnerArgs(process.argv.slice(2));
  } catch (e) {
    process.stderr.write(`bench: ${(e as Error).message}\n`);
    process.exitCode = 2;
    return;
  }
  const dir = path.dirname(fileURLToPath(import.meta.url));
  const log = options.json ? () => undefined : (text: string) => void process.stderr.write(text);
  const results = await runBenchmarks(dir, options, log);
  if (options.json) {
    const machine = { node: process.version, cpus: os.cpus().length, cpuModel: os.cpus()[0]?.model ?? 'unknown', platform: process.platform };
    process.stdout.write(JSON.stringify({ machine, date: new Date().toISOString(), results }, null, 2) + '\n');
    return;
  }
  if (results.length === 0) {
    process.stdout.write(options.only.length ? `no suite named ${options.only.join(', ')}\n` : 'no *.bench.js suites found\n');
    return;
  }
  process.stdout.write(formatTable(results));
  for (const r of results) if (r.error !== undefined) process.stdout.write(`\n${r.suite} failed:\n${r.error}\n`);
}

const invokedDirectly = process.argv[1] !== undefined && path.resolve(process.argv[1]) === fileURLToPath(import.meta.url);
if (invokedDirectly) {
  main().catch((e) => {
    process.stderr.write(`bench: ${(e as Error).stack ?? e}\n`);
  });
}
