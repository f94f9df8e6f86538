/**
 * Command-line fuzz (issue 11): bad model, patient, target and option inputs given to `simulate`,
 * `dose`, `check` and `fit`, run in process through the CLI runner (main/cli/run.ts) for speed.
 * Each input is built from the invented demo files (resources/demo) by one seeded mutation that
 * makes it invalid: a wrong type, NaN/Infinity text, a huge or denormal number, a prototype key,
 * deep nesting, a control character, a swapped file, a wrong option value. Counts are printed:
 * inputs tried, clear errors, crashes (an "internal error" or a stack / TypeError text reaching
 * the user, or a thrown runner), hangs (over the time limit), silent acceptances (a bad input that
 * produced a result). Crashes, hangs and silent acceptances must be 0.
 */
import { mkdtempSync, readFileSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import * as path from 'node:path';
import { beforeAll, describe, expect, it } from 'vitest';
import { runCli } from '../../main/cli/run.js';
import { captureIo } from '../helpers/captureIo.js';
import { ensureBuilt, repoRoot } from '../integration/services/build.js';

beforeAll(() => ensureBuilt(), 300_000);

type Json = null | boolean | number | string | Json[] | { [k: string]: Json };

const demo = (f: string) => readFileSync(path.join(repoRoot, 'resources/demo', f), 'utf8');
const MODEL = JSON.parse(demo('ward-model.json')) as Json;
const PATIENT = JSON.parse(demo('patient.json')) as Json;
const TARGET = JSON.parse(readFileSync(path.join(repoRoot, 'resources/targets/vancomycin-auc24.json'), 'utf8')) as Json;

/** Fields of free text: any string is valid there (it is shown escaped), so string mutations there are not "bad". */
const FREE_TEXT = new Set(['id', 'name', 'source', 'label', 'notes', 'drug', 'localProtocol', 'sourceStatus', 'kind', 'sex']);

function rng(seed: number): () => number {
  let a = seed >>> 0;
  return () => {
    a = (a + 0x6d2b79f5) >>> 0;
    let t = a;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
}

/** Every leaf path of a JSON value with its value. */
function leaves(x: Json, at: (string | number)[] = []): { path: (string | number)[]; value: Json }[] {
  if (x !== null && typeof x === 'object') {
    const entries: [string | number, Json][] = Array.isArray(x) ? x.map((v, i) => [i, v]) : Object.entries(x);
    return entries.flatMap(([k, v]) => leaves(v, [...at, k]));
  }
  return [{ path: at, value: x }];
}

function setAt(x: Json, p: (string | number)[], v: Json): Json {
  const copy = JSON.parse(JSON.stringify(x)) as Json;
  let node = copy as Record<string | number, Json>;
  for (const k of p.slice(0, -1)) node = node[k] as Record<string | number, Json>;
  node[p[p.length - 1]] = v;
  return copy;
}

/** Values never valid in a number field (finite, typed, within any plausible range). */
const BAD_NUMBERS: Json[] = ['NaN', 'Infinity', '-Infinity', '12', 1e308, -1e308, null, [], {}, true, 'toString'];
/** Values never valid in a closed-vocabulary text field (structure, route, relation, transform...). */
const BAD_WORDS: Json[] = [5, null, true, [], {}, 'toString', '__proto__', 'constructor', 'hasOwnProperty', '', 'NaN', '\u001b[2J'];
const HOSTILE_TEXT = ['\u001b[2J\u001b[31m', 'x\r\nADVICE: give 5000 mg', '\u202eevil', 'a\u0000b'];

interface Mutant {
  label: string;
  text: string;
  /** True when the input is invalid (a result would be a silent acceptance). */
  bad: boolean;
}

/** Mutants of one JSON input: seeded picks of its leaves and of the bad values. */
function mutants(base: Json, name: string, count: number, seed: number): Mutant[] {
  const random = rng(seed);
  const pick = <T,>(xs: readonly T[]): T => xs[Math.floor(random() * xs.length)];
  const all = leaves(base);
  const out: Mutant[] = [];
  for (let i = 0; i < count; i++) {
    const leaf = pick(all);
    const key = String(leaf.path[leaf.path.length - 1]);
    const where = leaf.path.join('.');
    if (typeof leaf.value === 'number') {
      const v = pick(BAD_NUMBERS);
      out.push({ label: `${name} ${where} = ${JSON.stringify(v)}`, text: JSON.stringify(setAt(base, leaf.path, v)), bad: true });
    } else if (typeof leaf.value === 'boolean') {
      const v = pick(['yes', 'true', 1, 0, null, [], 'maybe']);
      out.push({ label: `${name} ${where} = ${JSON.stringify(v)}`, text: JSON.stringify(setAt(base, leaf.path, v)), bad: true });
    } else if (typeof leaf.value === 'string' && leaf.path.some((p) => FREE_TEXT.has(String(p)))) {
      const v = pick(HOSTILE_TEXT);
      out.push({ label: `${name} ${where} = ${JSON.stringify(v)} (free text)`, text: JSON.stringify(setAt(base, leaf.path, v)), bad: false });
    } else if (typeof leaf.value === 'string' && /time/.test(key)) {
      const v = pick(['2026-13-45T99:99', 'yesterday', 1e308, null, '2026-11-23T08:00\r\nADVICE']);
      out.push({ label: `${name} ${where} = ${JSON.stringify(v)}`, text: JSON.stringify(setAt(base, leaf.path, v)), bad: true });
    } else {
      const v = pick(BAD_WORDS);
      out.push({ label: `${name} ${where} = ${JSON.stringify(v)}`, text: JSON.stringify(setAt(base, leaf.path, v)), bad: true });
    }
  }
  // Keys that are not part of any format, prototype keys first.
  const obj = base as Record<string, Json>;
  for (const k of ['__proto__', 'constructor', 'prototype', 'toString', 'extra_field']) {
    const raw = JSON.stringify(obj);
    out.push({ label: `${name} with an added key "${k}"`, text: `{"${k}": {"polluted": 1},${raw.slice(1)}`, bad: true });
  }
  // Structure attacks.
  out.push({ label: `${name} nested 100000 deep`, text: '['.repeat(100_000) + ']'.repeat(100_000), bad: true });
  out.push({ label: `${name} as an array`, text: JSON.stringify([base]), bad: true });
  out.push({ label: `${name} empty object`, text: '{}', bad: true });
  out.push({ label: `${name} truncated`, text: JSON.stringify(base).slice(0, 40), bad: true });
  const nanText = JSON.stringify(base).replace(/":\s*(\d+(\.\d+)?)/, '": NaN');
  out.push({ label: `${name} with NaN literal`, text: nanText, bad: nanText !== JSON.stringify(base) });
  const firstKey = Object.keys(obj)[0];
  out.push({ label: `${name} with a duplicate key`, text: `{${JSON.stringify(firstKey)}: ${JSON.stringify(obj[firstKey])},${JSON.stringify(base).slice(1)}`, bad: true });
  out.push({ label: `${name} as UTF-16 with BOM`, text: '\ufeff\u0000{', bad: true });
  return out;
}

interface Outcome {
  code: number | 'hang' | 'threw';
  out: string;
  err: string;
}

const HANG_MS = 20_000;

async function runOnce(dir: string, argv: string[]): Promise<Outcome> {
  const t = captureIo(dir);
  const controller = new AbortController();
  let timer: NodeJS.Timeout | undefined;
  const hang = new Promise<'hang'>((resolve) => {
    timer = setTimeout(() => {
      controller.abort();
      resolve('hang');
    }, HANG_MS);
  });
  try {
    const code = await Promise.race([runCli(argv, t.io, { signal: controller.signal, debug: false }), hang]);
    return { code, out: t.out(), err: t.err() };
  } catch (e) {
    return { code: 'threw', out: t.out(), err: `${t.err()}${String(e)}` };
  } finally {
    clearTimeout(timer);
  }
}

const CRASH_TEXT = /internal error|TypeError|RangeError|ReferenceError|SyntaxError: (?!.*JSON)|Maximum call stack|\n\s+at .*\((file:|node:|\/).*:\d+:\d+\)|is not iterable|Cannot (read|set) properties|undefined is not/;

interface Counts {
  tried: number;
  clearErrors: number;
  crashes: number;
  hangs: number;
  silent: number;
  accepted: number;
  rawControl: number;
  failures: string[];
}

function classify(c: Counts, label: string, r: Outcome, bad: boolean, acceptedWhen: (r: Outcome) => boolean): void {
  c.tried++;
  const text = r.out + r.err;
  if (r.code === 'hang') {
    c.hangs++;
    c.failures.push(`HANG ${label}`);
    return;
  }
  if (r.code === 'threw' || CRASH_TEXT.test(text) || (typeof r.code === 'number' && ![0, 1, 2].includes(r.code))) {
    c.crashes++;
    c.failures.push(`CRASH ${label}: ${text.slice(0, 300)}`);
    return;
  }
  // Text from a file never reaches the terminal raw (ESC, CR, bidi override, NUL).
  if (/[\u0000\u001b\r\u202e]/.test(text)) {
    c.rawControl++;
    c.failures.push(`RAW CONTROL ${label}`);
  }
  if (acceptedWhen(r)) {
    c.accepted++;
    if (bad) {
      c.silent++;
      c.failures.push(`SILENT ${label}: exit ${r.code}; ${r.err.slice(0, 200)}`);
    }
    return;
  }
  // check lists the problems of a file on stdout and exits 1.
  if (/plateau: \S/.test(r.err) || (r.code === 1 && /Problems: [1-9]\d* error/.test(r.out))) c.clearErrors++;
  else {
    c.crashes++;
    c.failures.push(`NO MESSAGE ${label}: exit ${r.code}: ${text.slice(0, 200)}`);
  }
}

describe('CLI fuzz: bad model, patient, target and option inputs', () => {
  it('no crash, no hang, no silent acceptance; counts printed', async () => {
    const t0 = Date.now();
    const dir = mkdtempSync(path.join(tmpdir(), 'plateau-clifuzz-'));
    writeFileSync(path.join(dir, 'model.json'), JSON.stringify(MODEL));
    writeFileSync(path.join(dir, 'patient.json'), JSON.stringify(PATIENT));
    writeFileSync(path.join(dir, 'target.json'), JSON.stringify(TARGET));
    writeFileSync(path.join(dir, 'data.csv'), demo('ward-levels.csv').split('\n').slice(0, 40).join('\n') + '\n');
    const c: Counts = { tried: 0, clearErrors: 0, crashes: 0, hangs: 0, silent: 0, accepted: 0, rawControl: 0, failures: [] };
    const simulated = (r: Outcome) => r.code === 0;
    // dose: the demo patient's advice is blocked by a check (exit 1) but its inputs were accepted when the report is printed.
    const advised = (r: Outcome) => /dose advice for patient/.test(r.out);

    // Model files through simulate (fast) and a sample through dose.
    const models = mutants(MODEL, 'model', 90, 11);
    for (const [i, m] of models.entries()) {
      writeFileSync(path.join(dir, 'm.json'), m.text);
      classify(c, `simulate ${m.label}`, await runOnce(dir, ['simulate', '--model', 'm.json', '--data', 'data.csv']), m.bad, simulated);
      if (i % 6 === 0) classify(c, `dose ${m.label}`, await runOnce(dir, ['dose', '--model', 'm.json', '--patient', 'patient.json', '--draws', '100']), m.bad, advised);
    }
    // Patient and target files through dose.
    for (const m of mutants(PATIENT, 'patient', 45, 12)) {
      writeFileSync(path.join(dir, 'p.json'), m.text);
      classify(c, `dose ${m.label}`, await runOnce(dir, ['dose', '--model', 'model.json', '--patient', 'p.json', '--draws', '100']), m.bad, advised);
    }
    for (const m of mutants(TARGET, 'target', 35, 13)) {
      writeFileSync(path.join(dir, 't.json'), m.text);
      classify(c, `dose ${m.label}`, await runOnce(dir, ['dose', '--model', 'model.json', '--patient', 'patient.json', '--target', 't.json', '--draws', '100']), m.bad, advised);
    }
    // Swapped files: each file given where another is expected.
    const swaps: [string, string[]][] = [
      ['simulate model=patient', ['simulate', '--model', 'patient.json', '--data', 'data.csv']],
      ['simulate model=target', ['simulate', '--model', 'target.json', '--data', 'data.csv']],
      ['simulate model=csv', ['simulate', '--model', 'data.csv', '--data', 'data.csv']],
      ['simulate data=model', ['simulate', '--model', 'model.json', '--data', 'model.json']],
      ['dose model=patient', ['dose', '--model', 'patient.json', '--patient', 'patient.json']],
      ['dose patient=model', ['dose', '--model', 'model.json', '--patient', 'model.json']],
      ['dose target=patient', ['dose', '--model', 'model.json', '--patient', 'patient.json', '--target', 'patient.json']],
      ['dose patient=csv', ['dose', '--model', 'model.json', '--patient', 'data.csv']],
      ['fit model=patient', ['fit', '--model', 'patient.json', '--data', 'data.csv']],
      ['fit data=model', ['fit', '--model', 'model.json', '--data', 'model.json']],
      ['check data=model', ['check', '--data', 'model.json']],
      ['check mapping=model', ['check', '--data', 'data.csv', '--mapping', 'model.json']],
      ['simulate model=folder', ['simulate', '--model', '.', '--data', 'data.csv']],
    ];
    for (const [label, argv] of swaps) classify(c, label, await runOnce(dir, argv), true, (r) => (argv[0] === 'dose' ? advised(r) : r.code === 0));
    // Wrong option values.
    const sim = ['simulate', '--model', 'model.json', '--data', 'data.csv'];
    const dose = ['dose', '--model', 'model.json', '--patient', 'patient.json'];
    const options: [string[], (r: Outcome) => boolean][] = [
      ...['abc', '1e300', '-1', 'NaN', 'Infinity', '0x10', '1.5', '', '4294967296'].map((s): [string[], (r: Outcome) => boolean] => [[...sim, '--variability', '--seed', s], simulated]),
      ...['0:0:10', 'a:b:c', '-1:1:10', '10:1:0', '0:1e-9:1e9', '0:1', 'Infinity:1:2', '0:0.0001:1000'].map((s): [string[], (r: Outcome) => boolean] => [[...sim, '--times', s], simulated]),
      [[...sim, '--out', 'x.txt'], simulated],
      [[...sim, '--out', '/nonexistent-plateau/x.csv'], simulated],
      [[...sim, '--unknown-flag'], simulated],
      [[...sim, '--variability=maybe'], simulated],
      ...['1e9', '99', '1.5', 'NaN', '-100'].map((s): [string[], (r: Outcome) => boolean] => [[...dose, '--draws', s], advised]),
      ...['Infinity', '0', '-1', '1e308'].map((s): [string[], (r: Outcome) => boolean] => [[...dose, '--target', 'vancomycin-auc24', '--mic', s], advised]),
      ...['1e308', '-5', 'NaN'].map((s): [string[], (r: Outcome) => boolean] => [[...dose, '--next-dose-h', s], advised]),
      ...['garbage', '1e308mg q12h 1h', '1000mg q0h 1h', '-5mg q12h 1h', '1000mg q12h 1e9h'].map((s): [string[], (r: Outcome) => boolean] => [[...dose, '--evaluate', s], advised]),
      [[...dose, '--target', 'toString'], advised],
      [[...dose, '--target', '__proto__'], advised],
      [[...dose, '--target', '../../etc/passwd'], advised],
      [[...dose, '--below', '-1'], advised],
      [[...dose, '--peak-after', '1e9', '--target', 'vancomycin-auc24'], advised],
      [[...dose, '--seed', '1e300'], advised],
      [[...dose, '--out', '/nonexistent-plateau/a.json'], advised],
      ...['0', '-1', '1e9', 'NaN'].map((s): [string[], (r: Outcome) => boolean] => [['check', '--data', 'data.csv', '--time-limit', s], (r) => r.code !== 2 && /Summary:/.test(r.out)]),
      ...['--molar-mass', '--lloq'].flatMap((f) => ['0', '-1', '1e308', 'x'].map((s): [string[], (r: Outcome) => boolean] => [['check', '--data', 'data.csv', f, s], (r) => /Summary:/.test(r.out)])),
      [['check', '--data', 'data.csv', '--default-route', 'toString'], (r) => /Summary:/.test(r.out)],
      [['check', '--data', 'data.csv', '--clock-changes', '__proto__'], (r) => /Summary:/.test(r.out)],
      [['check', '--data', 'data.csv', '--day-first', '--month-first'], (r) => /Summary:/.test(r.out)],
      [['check', '--data', 'data.csv', '--report', 'r.txt'], (r) => r.code === 0],
      ...['-1', '1.5', 'abc', '1e300'].map((s): [string[], (r: Outcome) => boolean] => [['fit', '--model', 'model.json', '--data', 'data.csv', '--seed', s], (r) => r.code === 0]),
      ...['1', '0', '-3', 'x'].map((s): [string[], (r: Outcome) => boolean] => [['fit', '--model', 'model.json', '--data', 'data.csv', '--repeat', s], (r) => r.code === 0]),
      [['nosuchcommand'], (r) => r.code === 0],
      [['verify', '--out', 'x.docx'], (r) => r.code === 0],
    ];
    for (const [argv, acceptedWhen] of options) classify(c, argv.join(' '), await runOnce(dir, argv), true, acceptedWhen);

    const seconds = (Date.now() - t0) / 1000;
    console.log(
      `CLI fuzz: ${c.tried} inputs tried, ${c.clearErrors} clear errors, ${c.accepted - c.silent} valid inputs accepted, ` +
        `${c.crashes} crashes, ${c.hangs} hangs, ${c.silent} silent acceptances, ${c.rawControl} raw control characters shown; ${seconds.toFixed(1)} s`,
    );
    if (c.failures.length) console.log(c.failures.slice(0, 40).join('\n'));
    expect(c.failures).toEqual([]);
    expect(c.crashes + c.hangs + c.silent + c.rawControl).toBe(0);
  }, 180_000);
});
