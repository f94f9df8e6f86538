/**
 * File helpers for every front door (CLI, worker, Electron, web host): JSON reading with located
 * errors, the one atomic writer, path resolution. Failures are ServiceErrors of kind 'file'.
 */
import { randomBytes } from 'node:crypto';
import { promises as fs, readFileSync, rmSync } from 'node:fs';
import * as path from 'node:path';
import { ServiceError } from './serviceError.js';
import { MAX_JSON_BYTES, readRegularTextFile } from './fileGuard.js';

/** Resolve a user-given path against the command's working directory. */
export function resolvePath(cwd: string, file: string): string {
  return path.resolve(cwd, file);
}

/** Read a text file (regular files only, within a size limit: fileGuard.ts); errors name it. */
export async function readTextFile(file: string, maxBytes = MAX_JSON_BYTES): Promise<string> {
  return readRegularTextFile(file, { maxBytes });
}

/** 1-based line and column of a character offset. */
export function lineColumn(text: string, offset: number): { line: number; column: number } {
  let line = 1;
  let lineStart = 0;
  for (let i = 0; i < offset && i < text.length; i++) {
    if (text.charCodeAt(i) === 10) {
      line++;
      lineStart = i + 1;
    }
  }
  return { line, column: offset - lineStart + 1 };
}

/**
 * Find where JSON text first breaks the grammar (RFC 8259) and why: used after JSON.parse has
 * failed, because Node 20's messages do not always give a position. With `checkDuplicates`, a
 * key given twice in one object is an error too (JSON.parse keeps the last silently).
 */
export function locateJsonError(text: string, checkDuplicates = false): { offset: number; reason: string } | undefined {
  let i = 0;
  const fail = (reason: string): never => {
    throw { offset: i, reason };
  };
  const ws = () => {
    while (i < text.length && ' \t\n\r'.includes(text[i])) i++;
  };
  const describe = () => (i >= text.length ? 'the file ends too early' : `unexpected ${JSON.stringify(text[i])}`);
  const value = (depth: number): void => {
    // No Plateau file nests beyond a few levels; a deeper one is refused before the stack runs out.
    if (depth > MAX_JSON_DEPTH) fail(`nesting deeper than ${MAX_JSON_DEPTH} levels`);
    ws();
    const c = text[i];
    if (c === '{') {
      i++;
      ws();
      if (text[i] === '}') return void i++;
      const keys = new Set<string>();
      for (;;) {
        ws();
        if (text[i] !== '"') fail(`${describe()} where a "quoted" key was expected`);
        const keyStart = i;
        string();
        if (checkDuplicates) {
          const key = JSON.parse(text.slice(keyStart, i)) as string;
          if (keys.has(key)) {
            i = keyStart;
            fail(`the key ${JSON.stringify(key).slice(0, 80)} appears twice in one object (which one is meant?)`);
          }
          keys.add(key);
        }
        ws();
        if (text[i] !== ':') fail(`${describe()} where ':' was expected`);
        i++;
        value(depth + 1);
        ws();
        if (text[i] === ',') {
          i++;
          ws();
          if (text[i] === '}') fail("trailing comma before '}'");
          continue;
        }
        if (text[i] === '}') return void i++;
        fail(`${describe()} where ',' or '}' was expected`);
      }
    }
    if (c === '[') {
      i++;
      ws();
      if (text[i] === ']') return void i++;
      for (;;) {
        value(depth + 1);
        ws();
        if (text[i] === ',') {
          i++;
          ws();
          if (text[i] === ']') fail("trailing comma before ']'");
          continue;
        }
        if (text[i] === ']') return void i++;
        fail(`${describe()} where ',' or ']' was expected`);
      }
    }
    if (c === '"') return string();
    for (const word of ['true', 'false', 'null']) {
      if (text.startsWith(word, i)) return void (i += word.length);
    }
    const m = /^-?(0|[1-9]\d*)(\.\d+)?([eE][+-]?\d+)?/.exec(text.slice(i, i + 400));
    if (m && m[0].length > 0 && m[0] !== '-') return void (i += m[0].length);
    fail(`${describe()} where a value was expected`);
  };
  const string = () => {
    i++;
    while (i < text.length) {
      const c = text.charCodeAt(i);
      if (c === 0x22) return void i++;
      if (c < 0x20) fail('a control character (e.g. a line break) inside a string');
      if (c === 0x5c) {
        const e = text[i + 1];
        if (e === 'u') {
          if (!/^[0-9a-fA-F]{4}$/.test(text.slice(i + 2, i + 6))) fail('bad \\u escape');
          i += 6;
        } else if (e !== undefined && '"\\/bfnrt'.includes(e)) i += 2;
        else fail('bad escape in a string');
      } else i++;
    }
    fail('a string is not closed');
  };
  try {
    value(0);
    ws();
    if (i < text.length) fail(`${describe()} after the end of the JSON value`);
    return undefined;
  } catch (e) {
    if (typeof e === 'object' && e !== null && 'offset' in e) return e as { offset: number; reason: string };
    throw e;
  }
}

/** Deepest nesting of objects and arrays accepted in an input file. */
export const MAX_JSON_DEPTH = 200;

/** Parse JSON text; a syntax error names the file, line and column. */
export function parseJsonText(text: string, file: string): unknown {
  const body = text.charCodeAt(0) === 0xfeff ? text.slice(1) : text;
  try {
    const value: unknown = JSON.parse(body);
    // JSON.parse keeps the last of two equal keys without a word: a file with both is refused.
    const dup = locateJsonError(body, true);
    if (dup) {
      const { line, column } = lineColumn(body, dup.offset);
      throw new ServiceError('file', `${file} is not valid input at line ${line}, column ${column}: ${dup.reason}`);
    }
    return value;
  } catch (e) {
    if (e instanceof ServiceError) throw e;
    const located = locateJsonError(body);
    if (!located) throw new ServiceError('file', `${file} is not valid JSON: ${(e as Error).message}`);
    const { line, column } = lineColumn(body, located.offset);
    throw new ServiceError('file', `${file} is not valid JSON at line ${line}, column ${column}: ${located.reason}`);
  }
}

/**
 * Read and parse a JSON file, with errors naming the file and the syntax position; `maxBytes`
 * MAX_FIT_RECORD_BYTES where the file may be a fit record.
 */
export async function readJsonFile(file: string, maxBytes = MAX_JSON_BYTES): Promise<unknown> {
  return parseJsonText(await readTextFile(file, maxBytes), file);
}

/** Temp files of writes in flight, removed if the process exits before they are renamed. */
const inFlightTemps = new Set<string>();
let exitHookInstalled = false;
let tempObserver: ((file: string, active: boolean) => void) | undefined;
let writesRefusedAfter: AbortSignal | undefined;

/** Be told of every temp file created and finished (the CLI supervisor removes them if it kills its child). */
export function setTempFileObserver(observer: ((file: string, active: boolean) => void) | undefined): void {
  tempObserver = observer;
}

/** Once `signal` aborts (Ctrl-C), writeFileAtomic refuses to write: no output appears after the user stopped. */
export function refuseWritesAfter(signal: AbortSignal | undefined): void {
  writesRefusedAfter = signal;
}

function checkNotCancelled(file: string): void {
  if (writesRefusedAfter?.aborted) throw new ServiceError('cancelled', `stopped: ${file} was not written`);
}

function trackTemp(tmp: string): void {
  if (!exitHookInstalled) {
    exitHookInstalled = true;
    process.once('exit', () => {
      for (const t of inFlightTemps) rmSync(t, { force: true });
    });
  }
  inFlightTemps.add(tmp);
  tempObserver?.(tmp, true);
}

function untrackTemp(tmp: string): void {
  inFlightTemps.delete(tmp);
  tempObserver?.(tmp, false);
}

/**
 * Check before long work that `file` can be written later: its folder exists and is a folder,
 * and the file itself is not a folder. Throws a ServiceError of kind 'file' naming the problem.
 */
export async function checkOutputPath(file: string): Promise<void> {
  const dir = path.dirname(file);
  const st = await fs.stat(dir).catch(() => undefined);
  if (!st) throw new ServiceError('file', `cannot write ${file}: the folder ${dir} does not exist`);
  if (!st.isDirectory()) throw new ServiceError('file', `cannot write ${file}: ${dir} is not a folder`);
  const target = await fs.stat(file).catch(() => undefined);
  if (target?.isDirectory()) throw new ServiceError('file', `cannot write ${file}: it is a folder`);
  try {
    await fs.access(dir, (await import('node:fs')).constants.W_OK);
  } catch {
    throw new ServiceError('file', `cannot write ${file}: no permission to write in ${dir}`);
  }
}

/** True when a process with this id is running (EPERM: it runs as another user). */
function processAlive(pid: number): boolean {
  try {
    process.kill(pid, 0);
  } catch (e) {
    return (e as NodeJS.ErrnoException).code === 'EPERM';
  }
  return !zombie(pid);
}

/**
 * A killed process whose parent was killed too can stay a zombie under a parent that does not
 * reap it; signal 0 still reaches a zombie, but it writes nothing any more (Linux: state Z in
 * /proc/<pid>/stat, after the command name in parentheses).
 */
function zombie(pid: number): boolean {
  if (process.platform !== 'linux') return false;
  try {
    const stat = readFileSync(`/proc/${pid}/stat`, 'utf8');
    return stat.slice(stat.lastIndexOf(')') + 2, stat.lastIndexOf(')') + 3) === 'Z';
  } catch {
    return false;
  }
}

/**
 * Remove temp files of `file` (`.name.pid.rand.tmp`) left by a process killed during a write
 * (SIGKILL runs no exit hook): those whose process is gone, and this process's own that no
 * write in flight holds (a reused pid). Another live process's temp file is left alone.
 */
export async function removeStaleTemps(file: string): Promise<string[]> {
  const dir = path.dirname(file);
  const base = path.basename(file);
  const prefix = `.${base}.`;
  let names: string[];
  try {
    names = await fs.readdir(dir);
  } catch {
    return [];
  }
  const removed: string[] = [];
  for (const name of names) {
    if (!name.startsWith(prefix) || !name.endsWith('.tmp')) continue;
    const m = /^(\d+)\.[0-9a-f]{8}\.tmp$/.exec(name.slice(prefix.length));
    if (!m) continue;
    const pid = Number(m[1]);
    const full = path.join(dir, name);
    const stale = pid === process.pid ? !inFlightTemps.has(full) : !processAlive(pid);
    if (!stale) continue;
    await fs.rm(full, { force: true }).catch(() => undefined);
    removed.push(full);
  }
  return removed;
}

/**
 * Write a file atomically: a temporary file in the same folder, flushed, then renamed over the
 * target, so a reader never sees half a file and a crash leaves the old file intact. Temp files
 * of the same target left by a killed process are removed first (removeStaleTemps).
 */
export async function writeFileAtomic(file: string, data: string | Uint8Array): Promise<void> {
  checkNotCancelled(file);
  const dir = path.dirname(file);
  try {
    const st = await fs.stat(dir);
    if (!st.isDirectory()) throw new ServiceError('file', `cannot write ${file}: ${dir} is not a folder`);
  } catch (e) {
    if (e instanceof ServiceError) throw e;
    throw new ServiceError('file', `cannot write ${file}: the folder ${dir} does not exist`);
  }
  await removeStaleTemps(file);
  const tmp = path.join(dir, `.${path.basename(file)}.${process.pid}.${randomBytes(4).toString('hex')}.tmp`);
  let handle: fs.FileHandle | undefined;
  trackTemp(tmp);
  try {
    handle = await fs.open(tmp, 'w');
    await handle.writeFile(data);
    await handle.sync();
    await handle.close();
    handle = undefined;
    checkNotCancelled(file);
    await fs.rename(tmp, file);
  } catch (e) {
    if (handle) await handle.close().catch(() => undefined);
    await fs.rm(tmp, { force: true }).catch(() => undefined);
    if (e instanceof ServiceError) throw e;
    throw new ServiceError('file', `cannot write ${file}: ${(e as Error).message}`);
  } finally {
    untrackTemp(tmp);
  }
}
