/**
 * The `plateau` command runner, shared by the bin (plateau.ts) and by in-process tests.
 * Commands are discovered at run time from the commands/ folder beside this file (one module
 * per command exporting `command: CliCommand`), so adding a command edits no shared registry.
 * A command runs after loading only its own module (the file named after it), so `plateau fit`
 * does not load the spreadsheet, dosing or verification code of the other commands; help, an
 * unknown name or a module whose command has another name load them all.
 */
import { promises as fs } from 'node:fs';
import * as path from 'node:path';
import { fileURLToPath, pathToFileURL } from 'node:url';
import { DataError } from '../../engine/data/types.js';
import { SpecError } from '../../engine/spec/modelSpec.js';
import { CovariateValueError } from '../../engine/spec/individual.js';
import { ServiceError } from '../services/serviceError.js';
import { printable } from '../../engine/text/printable.js';
import { CliError, UsageError, type CliCommand, type CliIo } from './types.js';

export interface RunOptions {
  /** Folder to discover commands in (default: commands/ next to this module). */
  commandsDir?: string;
  signal?: AbortSignal;
  /** Print stack traces for unexpected errors (default: PLATEAU_DEBUG=1 in the environment). */
  debug?: boolean;
}

interface LoadedCommand {
  name: string;
  command?: CliCommand;
  /** Why the module could not be used (shown when the command is asked for). */
  loadError?: string;
}

const defaultCommandsDir = (): string => path.join(path.dirname(fileURLToPath(import.meta.url)), 'commands');

/**
 * The paths the command line, as a host, gives the services (docs/architecture.md, "Roots"):
 * the compiled engine worker and the resources folder. Built code (dist/main/cli) finds both
 * relative to itself; run from source (tests), the worker is the repository's dist/ build.
 */
export function cliServiceRoots(): { workerEntry: string; resourcesDir: string } {
  const here = path.dirname(fileURLToPath(import.meta.url));
  const inDist = here.split(path.sep).includes('dist');
  const root = inDist ? path.resolve(here, '..', '..', '..') : path.resolve(here, '..', '..');
  return {
    workerEntry: inDist ? path.join(here, '..', 'worker', 'engineWorker.js') : path.join(root, 'dist', 'main', 'worker', 'engineWorker.js'),
    resourcesDir: path.join(root, 'resources'),
  };
}

function isCommandModule(file: string): boolean {
  if (file.endsWith('.d.ts') || /\.(test|spec)\.[cm]?[jt]s$/.test(file)) return false;
  return /\.[cm]?js$/.test(file) || /\.[cm]?ts$/.test(file);
}

function isCommand(x: unknown): x is CliCommand {
  const c = x as CliCommand;
  return typeof c === 'object' && c !== null && typeof c.name === 'string' && typeof c.run === 'function';
}

/** Load every command module; a module that fails to load is kept as an error, not fatal. */
export async function loadCommands(dir: string = defaultCommandsDir()): Promise<Map<string, LoadedCommand>> {
  const found = new Map<string, LoadedCommand>();
  // Under the source tree both a .ts and (never) a .js may exist; prefer .js (compiled) once per name.
  const byName = await commandFiles(dir);
  if (!byName) return found;
  for (const [base, file] of byName) {
    const c = await loadCommandFile(dir, base, file);
    found.set(c.name, c);
  }
  return found;
}

/** One command module: its command, or why it cannot be used (keyed by the file's base name). */
async function loadCommandFile(dir: string, base: string, file: string): Promise<LoadedCommand> {
  try {
    const mod = (await import(pathToFileURL(path.join(dir, file)).href)) as { command?: unknown };
    if (!isCommand(mod.command)) return { name: base, loadError: `${file} does not export \`command\` (a CliCommand)` };
    return { name: mod.command.name, command: mod.command };
  } catch (e) {
    return { name: base, loadError: `${file} failed to load: ${(e as Error).message}` };
  }
}

/** The module files in `dir`, one per base name (a compiled .js preferred over its .ts source). */
async function commandFiles(dir: string): Promise<Map<string, string> | undefined> {
  let files: string[];
  try {
    files = (await fs.readdir(dir)).filter(isCommandModule).sort();
  } catch {
    return undefined;
  }
  const byName = new Map<string, string>();
  for (const file of files) {
    const base = file.replace(/\.[cm]?[jt]s$/, '');
    const prev = byName.get(base);
    if (!prev || /\.[cm]?js$/.test(file)) byName.set(base, file);
  }
  return byName;
}

/**
 * The command `name` after loading only the module named after it; undefined when there is no
 * such file or its command has another name (the caller then loads every module).
 */
async function loadNamedCommand(dir: string, name: string): Promise<LoadedCommand | undefined> {
  const file = (await commandFiles(dir))?.get(name);
  if (file === undefined) return undefined;
  const c = await loadCommandFile(dir, name, file);
  return c.name === name ? c : undefined;
}

function helpText(commands: Map<string, LoadedCommand>): string {
  const names = [...commands.keys()].sort();
  const width = Math.max(4, ...names.map((n) => n.length));
  const lines = names.map((n) => {
    const c = commands.get(n)!;
    return `  ${n.padEnd(width)}  ${c.command ? c.command.summary : '(unavailable: ' + c.loadError + ')'}`;
  });
  return [
    'Plateau: population PK fitting (SAEM) and Bayesian dose individualisation.',
    '',
    'Usage: plateau <command> [options]',
    '       plateau <command> --help',
    '',
    'Commands:',
    `  ${'help'.padEnd(width)}  Show this list, or a command's usage: plateau help <command>`,
    ...lines,
    '',
  ].join('\n');
}

// DatasetLoadError by name: its module (the dataset loader) is loaded only by commands that read data.
const EXPECTED_ERROR_NAMES = new Set(['DatasetLoadError', 'ImportError', 'WorkbookError', 'TemplateError', 'PatientError', 'PopulationModelError', 'PriorError', 'RegimenParseError', 'TargetError', 'AdviceError', 'ModelDataError', 'SaemCancelledError']);

function withNewline(text: string): string {
  return text.endsWith('\n') ? text : `${text}\n`;
}

/** Text from files can reach an error message (ids, cell values): escape control characters line by line. */
function safe(text: string): string {
  return text.split('\n').map(printable).join('\n');
}

/** Print a failure readably and return its exit code; no stack trace unless debugging. */
export function reportError(error: unknown, io: CliIo, debug: boolean, usage?: string, command?: string): number {
  if (error instanceof UsageError) {
    io.stderr(`plateau: ${safe(error.message)}\n`);
    const u = error.usage ?? usage;
    if (u) io.stderr(`\n${withNewline(u)}`);
    return 2;
  }
  if (error instanceof DataError) {
    io.stderr(`plateau: ${withNewline(safe(error.message))}`);
    io.stderr('Fix the rows listed above and run the command again.\n');
    if (debug && error.stack) io.stderr(`${error.stack}\n`);
    return 1;
  }
  if (error instanceof SpecError) {
    io.stderr(`plateau: the model spec has ${error.problems.length} problem(s):\n`);
    for (const p of error.problems) io.stderr(`  ${safe(p)}\n`);
    io.stderr('Fix these fields in the spec file (see README, "Model spec").\n');
    if (debug && error.stack) io.stderr(`${error.stack}\n`);
    return 1;
  }
  // Errors that already say what to do (ours, and the import service's by name) print as they are.
  if (error instanceof CliError || error instanceof ServiceError || error instanceof CovariateValueError || (error instanceof Error && EXPECTED_ERROR_NAMES.has(error.name))) {
    io.stderr(`plateau: ${withNewline(safe(error.message))}`);
    if (debug && error.stack) io.stderr(`${error.stack}\n`);
    return 1;
  }
  // Anything else is a bug in Plateau: its raw text names code, not the user's file, so it is
  // shown only when debugging.
  io.stderr(`plateau: internal error: an unexpected failure in Plateau, not a problem found in your files${command ? ` (command ${command})` : ''}\n`);
  if (debug) {
    const message = error instanceof Error ? error.message : String(error);
    io.stderr(`${printable(message)}\n`);
    if (error instanceof Error && error.stack) io.stderr(`${error.stack}\n`);
  } else io.stderr('(run again with PLATEAU_DEBUG=1 to see what failed and where, and report it)\n');
  return 1;
}

/** Run `plateau <argv...>`; resolves to the exit code. Never throws. */
export async function runCli(argv: readonly string[], io: CliIo, options: RunOptions = {}): Promise<number> {
  const debug = options.debug ?? (typeof process !== 'undefined' && process.env.PLATEAU_DEBUG === '1');
  const [first, ...rest] = argv;
  if (first === '--version') {
    io.stdout('plateau 0.1.0\n');
    return 0;
  }
  const dir = options.commandsDir ?? defaultCommandsDir();
  let commands: Map<string, LoadedCommand>;
  try {
    const named = first === undefined || first.startsWith('-') ? undefined : await loadNamedCommand(dir, first);
    commands = named ? new Map([[named.name, named]]) : await loadCommands(dir);
  } catch (e) {
    return reportError(e, io, debug);
  }
  if (first === undefined || first === 'help' || first === '--help' || first === '-h') {
    const target = first === 'help' ? rest[0] : undefined;
    if (target !== undefined) {
      const c = commands.get(target);
      if (!c) {
        io.stderr(`plateau: unknown command "${target}"\n\n${helpText(commands)}`);
        return 2;
      }
      if (!c.command) {
        io.stderr(`plateau: the ${target} command is unavailable: ${c.loadError}\n`);
        return 1;
      }
      io.stdout(withNewline(c.command.usage));
      return 0;
    }
    (first === undefined ? io.stderr : io.stdout)(helpText(commands));
    return first === undefined ? 2 : 0;
  }
  const c = commands.get(first);
  if (!c) {
    io.stderr(`plateau: unknown command "${first}"\n\n${helpText(commands)}`);
    return 2;
  }
  if (!c.command) {
    io.stderr(`plateau: the ${first} command is unavailable: ${c.loadError}\n`);
    return 1;
  }
  if (rest.includes('--help') || rest.includes('-h')) {
    io.stdout(withNewline(c.command.usage));
    return 0;
  }
  try {
    const code = await c.command.run([...rest], io, options.signal);
    return Number.isInteger(code) ? code : 1;
  } catch (e) {
    return reportError(e, io, debug, c.command.usage, first);
  }
}
