/**
 * Benchmark of the structural models: observation-evaluations per second per model (single
 * dose, 10 levels per patient), patient-evaluations per second for a 2-compartment infusion
 * history of 60 doses and 4 levels, and the cost ratio when the number of doses doubles.
 * Rates are per CPU-second of this process (process.cpuUsage), which other jobs on a shared
 * machine disturb less than wall time. Figures only; nothing here is asserted.
 *
 * Beside them: the inner loop against compiled C (tests/bench/c/kernels.c, the same arithmetic
 * built with `cc -O2` when a C compiler is present), run in alternating rounds so that both
 * sides see the same load; the memory of prepared predictors per 1,000 patients; and the time to
 * import the module graph of `plateau fit` in a fresh process.
 */
import { execFileSync, spawnSync } from 'node:child_process';
import { mkdtempSync, rmSync } from 'node:fs';
import * as os from 'node:os';
import * as path from 'node:path';
import { pathToFileURL } from 'node:url';
import * as v8 from 'node:v8';
import * as vm from 'node:vm';
import type { Dose } from '../../engine/data/types.js';
import { getStructuralModel } from '../../engine/models/catalogue.js';
import type { Predictor, StructureId } from '../../engine/models/types.js';
import { findRepoFile, tdmDesign } from './workloads.js';

interface Figure { name: string; value: number; unit: string; target?: string; note?: string }

const LEVEL_TIMES = [0.5, 1, 1.5, 2, 3, 4, 6, 8, 12, 24];

/** CPU time of this process in ms: on a shared, loaded machine it tracks the work done better than wall time. */
function cpuMs(): number {
  const u = process.cpuUsage();
  return (u.user + u.system) / 1000;
}

/** Calls per CPU-second of predictor over a few parameter vectors, timed over about `seconds`. */
function callsPerSecond(predict: Predictor, paramSets: Float64Array[], nOut: number, seconds = 0.6): number {
  const out = new Float64Array(nOut);
  let sink = 0;
  const warm = cpuMs();
  while (cpuMs() - warm < 150) for (const p of paramSets) predict(p, out);
  let calls = 0;
  let batch = 1000;
  const t0 = cpuMs();
  let elapsed = 0;
  while (elapsed < seconds * 1000) {
    for (let i = 0; i < batch; i++) {
      predict(paramSets[i % paramSets.length], out);
      sink += out[0];
    }
    calls += batch;
    elapsed = cpuMs() - t0;
    if (elapsed < 50) batch *= 2;
  }
  if (!Number.isFinite(sink)) throw new Error('benchmark produced non-finite levels');
  return calls / (elapsed / 1000);
}

/** A handful of parameter vectors around the catalogue's starting values (so nothing can be cached). */
function paramSets(id: StructureId): Float64Array[] {
  const m = getStructuralModel(id);
  return [1, 1.1, 0.9, 1.05].map((f, j) =>
    Float64Array.from(m.parameters.map((p) => (p.name === 'F' ? 0.8 : p.name === 'tlag' ? 0.25 * j : p.defaultInitial * f))),
  );
}

/** Every 8 h, 1 h infusions; `irregular` moves each dose by a different odd number of minutes (as recorded clock times do), so no interval length repeats. */
function infusionHistory(nDoses: number, irregular = false): { doses: Dose[]; times: number[] } {
  const doses: Dose[] = Array.from({ length: nDoses }, (_, i) => ({
    timeH: 8 * i + (irregular ? ((i * 37) % 41) / 60 : 0),
    amountMg: 1000,
    route: 'infusion',
    durationH: irregular ? 1 + ((i * 13) % 7) / 60 : 1,
  }));
  const end = 8 * nDoses;
  return { doses, times: [end - 8.01, end - 7, end - 4, end - 0.01] };
}

const median = (xs: number[]): number => {
  const a = [...xs].sort((x, y) => x - y);
  const m = a.length >> 1;
  return a.length % 2 ? a[m] : 0.5 * (a[m - 1] + a[m]);
};
const best = (xs: number[]): number => Math.max(...xs);
const ROUNDS = 7;

/** The two kernels the C reference implements, prepared through the engine's public interface. */
function kernels(): { name: string; cArg: string; predict: Predictor; params: Float64Array[]; nOut: number; levelsPerCall: number }[] {
  const oral = getStructuralModel('1cmt').prepare([{ timeH: 0, amountMg: 500, route: 'oral', durationH: 0 }], LEVEL_TIMES);
  const h = infusionHistory(60);
  const inf = getStructuralModel('2cmt').prepare(h.doses, h.times);
  return [
    { name: '1cmt oral single dose, 10 levels', cArg: 'oral', predict: oral, params: paramSets('1cmt'), nOut: LEVEL_TIMES.length, levelsPerCall: LEVEL_TIMES.length },
    { name: '2cmt infusion history, 60 doses, 4 levels', cArg: 'inf', predict: inf, params: paramSets('2cmt'), nOut: h.times.length, levelsPerCall: 1 },
  ];
}

/** Compiles the C reference into a temporary folder; null (and why) when there is no compiler or it fails. */
function buildCReference(): { bin: string; dir: string } | { missing: string } {
  const source = findRepoFile('tests/bench/c/kernels.c');
  const dir = mkdtempSync(path.join(os.tmpdir(), 'plateau-bench-c-'));
  const bin = path.join(dir, 'kernels');
  for (const cc of ['cc', 'gcc', 'clang']) {
    const r = spawnSync(cc, ['-O2', '-o', bin, source, '-lm'], { encoding: 'utf8' });
    if (r.error && (r.error as NodeJS.ErrnoException).code === 'ENOENT') continue;
    if (r.status === 0) return { bin, dir };
    rmSync(dir, { recursive: true, force: true });
    return { missing: `${cc} -O2 failed: ${(r.stderr || String(r.error)).split('\n')[0]}` };
  }
  rmSync(dir, { recursive: true, force: true });
  return { missing: 'no C compiler found (cc, gcc, clang): the C reference and the ratio were not measured' };
}

/** The inner loop against the C reference: rounds alternate engine and C so that both see the same load. */
function versusC(figures: Figure[]): void {
  const c = buildCReference();
  const ks = kernels();
  if ('missing' in c) {
    for (const k of ks) {
      const rates = Array.from({ length: 3 }, () => callsPerSecond(k.predict, k.params, k.nOut, 0.3));
      figures.push({ name: `vs C: ${k.name}, engine`, value: best(rates) * k.levelsPerCall, unit: k.levelsPerCall > 1 ? 'obs-evals/s' : 'patient-evals/s', note: c.missing });
    }
    return;
  }
  try {
    for (const k of ks) {
      const js: number[] = [];
      const cc: number[] = [];
      const paired: number[] = [];
      let cLevels: number[] = [];
      for (let r = 0; r < ROUNDS; r++) {
        const a = callsPerSecond(k.predict, k.params, k.nOut, 0.3);
        const res = JSON.parse(execFileSync(c.bin, [k.cArg, '0.3'], { encoding: 'utf8' })) as { callsPerSecond: number; levels: number[] };
        const b = callsPerSecond(k.predict, k.params, k.nOut, 0.3);
        cLevels = res.levels;
        js.push(a, b);
        cc.push(res.callsPerSecond);
        paired.push((0.5 * (a + b)) / res.callsPerSecond);
      }
      // The C levels against the engine's for the first parameter vector: the same arithmetic
      // up to the last bits of libm's exp / expm1 against V8's.
      const out = new Float64Array(k.nOut);
      k.predict(k.params[0], out);
      let maxRel = 0;
      out.forEach((v, i) => (maxRel = Math.max(maxRel, Math.abs(v - cLevels[i]) / Math.abs(cLevels[i]))));
      const unit = k.levelsPerCall > 1 ? 'obs-evals/s' : 'patient-evals/s';
      const m = k.levelsPerCall;
      figures.push({ name: `vs C: ${k.name}, engine (best / median of ${2 * ROUNDS})`, value: best(js) * m, unit, note: `median ${formatRate(median(js) * m)}` });
      figures.push({ name: `vs C: ${k.name}, C -O2 (best / median of ${ROUNDS})`, value: best(cc) * m, unit, note: `median ${formatRate(median(cc) * m)}; levels differ from the engine's by <= ${maxRel.toExponential(1)} relative` });
      figures.push({
        name: `vs C: ${k.name}, engine / C`,
        value: median(paired),
        unit: 'x',
        target: '>= 0.45',
        note: `median of ${ROUNDS} paired rounds (range ${Math.min(...paired).toFixed(2)}-${Math.max(...paired).toFixed(2)}); best / best ${(best(js) / best(cc)).toFixed(2)}`,
      });
    }
  } finally {
    rmSync(c.dir, { recursive: true, force: true });
  }
}

function formatRate(x: number): string {
  return x.toExponential(2);
}

/** A full garbage collection, through the flag V8 lets a running process turn on. */
function collectGarbage(): void {
  v8.setFlagsFromString('--expose-gc');
  (vm.runInNewContext('gc') as () => void)();
}

/**
 * Bytes per patient held by what `make` builds, after full collections: heapUsed (objects,
 * small typed arrays) plus arrayBuffers (larger typed-array stores live outside the heap).
 * A function of its own so that nothing from an earlier round stays reachable from this frame.
 */
function bytesPerPatient(make: () => Predictor[]): { heap: number; buffers: number } {
  collectGarbage();
  const before = process.memoryUsage();
  const kept = make();
  collectGarbage();
  const after = process.memoryUsage();
  const n = kept.length;
  return { heap: (after.heapUsed - before.heapUsed) / n, buffers: (after.arrayBuffers - before.arrayBuffers) / n };
}

/**
 * Memory of prepared predictors (schedule, step program, interval tables where they keep their own) per
 * 1,000 patients: the sparse TDM design (2cmt, 12 infusions, 2-4 levels) and a single oral dose
 * with 10 levels (1cmt); the median of 3 rounds of 5,000 patients.
 */
function memory(figures: Figure[]): void {
  const n = 5000;
  const tdm = tdmDesign(n, 31);
  const oralDose: Dose[] = [{ timeH: 0, amountMg: 500, route: 'oral', durationH: 0 }];
  const cases: [string, () => Predictor[]][] = [
    ['2cmt, 12 infusions, 2-4 levels (sparse TDM design)', () => tdm.subjects.map((s) => getStructuralModel('2cmt').prepare(s.doses, s.observations.map((o) => o.timeH)))],
    ['1cmt, one oral dose, 10 levels', () => Array.from({ length: n }, () => getStructuralModel('1cmt').prepare(oralDose, LEVEL_TIMES))],
  ];
  for (const [name, make] of cases) {
    const rounds = [bytesPerPatient(make), bytesPerPatient(make), bytesPerPatient(make)];
    const total = median(rounds.map((r) => r.heap + r.buffers));
    figures.push({
      name: `memory of prepared predictors: ${name}`,
      value: (total * 1000) / 2 ** 20,
      unit: 'MiB / 1,000 patients',
      note: `${Math.round(total)} bytes per patient (heap ${Math.round(median(rounds.map((r) => r.heap)))} + array buffers ${Math.round(median(rounds.map((r) => r.buffers)))}); median of 3 rounds of ${n}`,
    });
  }
}

/** Wall time of `node -e <code>` in a fresh process (ms). */
function processMs(args: string[]): number {
  const t0 = performance.now();
  execFileSync(process.execPath, args, { stdio: 'ignore' });
  return performance.now() - t0;
}

/**
 * Start-up: a fresh Node process that imports the module graph of `plateau fit` (the command
 * module with the engine and services it loads), against a bare Node process.
 */
function startUp(figures: Figure[]): void {
  const fitModule = pathToFileURL(findRepoFile('dist/main/cli/commands/fit.js')).href;
  const importIt = ['--input-type=module', '-e', `await import(${JSON.stringify(fitModule)})`];
  const bare = ['-e', '0'];
  const withFit: number[] = [];
  const without: number[] = [];
  processMs(importIt); // disk cache
  for (let r = 0; r < ROUNDS; r++) {
    without.push(processMs(bare));
    withFit.push(processMs(importIt));
  }
  const paired = withFit.map((t, i) => t - without[i]);
  figures.push({ name: 'start-up: bare node process', value: Math.min(...without), unit: 'ms', note: `wall, best of ${ROUNDS}; median ${median(without).toFixed(0)}` });
  figures.push({
    name: "start-up: importing `plateau fit`'s module graph",
    value: median(paired),
    unit: 'ms',
    note: `above a bare process, median of ${ROUNDS} paired rounds; best ${(Math.min(...withFit) - Math.min(...without)).toFixed(0)} (dist/main/cli/commands/fit.js)`,
  });
}

export const suite = {
  name: 'models',
  run: async (): Promise<Figure[]> => {
    const figures: Figure[] = [];
    versusC(figures);
    const single: [StructureId, Dose['route'], string?][] = [
      ['1cmt', 'oral', '>= 1e7'],
      ['1cmt', 'bolus'],
      ['1cmt', 'infusion'],
      ['2cmt', 'oral'],
      ['2cmt', 'infusion'],
      ['3cmt', 'oral'],
      ['3cmt', 'infusion'],
      ['1cmt-mm', 'oral'],
      ['1cmt-mm', 'infusion'],
    ];
    for (const [id, route, target] of single) {
      const dose: Dose = { timeH: 0, amountMg: 500, route, durationH: route === 'infusion' ? 1 : 0 };
      const predict = getStructuralModel(id).prepare([dose], LEVEL_TIMES);
      const cps = callsPerSecond(predict, paramSets(id), LEVEL_TIMES.length, id === '1cmt-mm' ? 0.4 : 0.6);
      figures.push({
        name: `${id} ${route} single dose`,
        value: cps * LEVEL_TIMES.length,
        unit: 'obs-evals/s',
        ...(target ? { target } : {}),
        note: `${LEVEL_TIMES.length} levels per call`,
      });
    }

    const perSecond = (nDoses: number, irregular = false): number => {
      const h = infusionHistory(nDoses, irregular);
      const predict = getStructuralModel('2cmt').prepare(h.doses, h.times);
      return callsPerSecond(predict, paramSets('2cmt'), h.times.length, 0.8);
    };
    const p60 = perSecond(60);
    figures.push({ name: '2cmt infusion history, 60 doses, 4 levels', value: p60, unit: 'patient-evals/s', target: '>= 2e5' });
    figures.push({
      name: '2cmt infusion history, 60 doses at irregular times, 4 levels',
      value: perSecond(60, true),
      unit: 'patient-evals/s',
      note: 'no interval length repeats: every interval computes its exponentials',
    });
    const p120 = perSecond(120);
    figures.push({
      name: 'cost ratio, 120 vs 60 doses (2cmt infusion)',
      value: p60 / p120,
      unit: 'x',
      target: '~2',
      note: 'cost grows with events + levels, not events x levels',
    });
    const mm = getStructuralModel('1cmt-mm');
    const h = infusionHistory(60);
    figures.push({
      name: '1cmt-mm infusion history, 60 doses, 4 levels',
      value: callsPerSecond(mm.prepare(h.doses, h.times), paramSets('1cmt-mm'), 4, 0.5),
      unit: 'patient-evals/s',
    });
    memory(figures);
    startUp(figures);
    return figures;
  },
};
