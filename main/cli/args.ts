/**
 * A small strict flag parser: `--flag value`, `--flag=value`, boolean flags, repeated flags,
 * positionals. Unknown flags and missing values are usage errors carrying the command's usage.
 */
import { UsageError } from './types.js';

export interface FlagSpec {
  /** 'string' takes a value; 'boolean' takes none (`--flag=false` is accepted). */
  type: 'string' | 'boolean';
  /** May be given more than once (values collected in order). */
  multiple?: boolean;
  /** Must be given. */
  required?: boolean;
  /** Single-letter alias, e.g. 'o' for -o. */
  short?: string;
}

export type FlagSpecs = Record<string, FlagSpec>;

export interface ParsedArgs {
  /** Flag name -> value: string, boolean, or string[] for multiple flags. Null-prototype. */
  flags: Record<string, string | boolean | string[]>;
  positionals: string[];
  /** True when --help or -h was given (other checks are skipped). */
  help: boolean;
}

export interface ParseOptions {
  usage?: string;
  /** Allowed number of positionals (default 0). */
  maxPositionals?: number;
}

export function parseArgs(argv: readonly string[], specs: FlagSpecs, options: ParseOptions = {}): ParsedArgs {
  const usage = options.usage;
  const flags: Record<string, string | boolean | string[]> = Object.create(null);
  const positionals: string[] = [];
  const byShort = new Map<string, string>();
  for (const [name, spec] of Object.entries(specs)) if (spec.short) byShort.set(spec.short, name);
  const known = Object.keys(specs);
  let help = false;

  for (let i = 0; i < argv.length; i++) {
    const arg = argv[i];
    if (arg === '--help' || arg === '-h') {
      help = true;
      continue;
    }
    if (arg === '--') {
      positionals.push(...argv.slice(i + 1));
      break;
    }
    let name: string;
    let inline: string | undefined;
    if (arg.startsWith('--')) {
      const eq = arg.indexOf('=');
      name = eq >= 0 ? arg.slice(2, eq) : arg.slice(2);
      inline = eq >= 0 ? arg.slice(eq + 1) : undefined;
    } else if (arg.length === 2 && arg[0] === '-' && arg[1] !== '-' && !/[0-9.]/.test(arg[1])) {
      const long = byShort.get(arg[1]);
      if (!long) throw new UsageError(`unknown option ${arg}`, usage);
      name = long;
    } else {
      positionals.push(arg);
      continue;
    }
    const spec = specs[name];
    if (!spec || !Object.prototype.hasOwnProperty.call(specs, name)) {
      const hint = known.length ? ` (known options: ${known.map((k) => `--${k}`).join(', ')})` : ' (this command takes no options)';
      throw new UsageError(`unknown option --${name}${hint}`, usage);
    }
    let value: string | boolean;
    if (spec.type === 'boolean') {
      if (inline === undefined) value = true;
      else if (inline === 'true' || inline === '1') value = true;
      else if (inline === 'false' || inline === '0') value = false;
      else throw new UsageError(`option --${name} is a switch: use --${name} or --${name}=false, not --${name}=${inline}`, usage);
    } else if (inline !== undefined) {
      value = inline;
    } else {
      const next = argv[i + 1];
      if (next === undefined || (next.startsWith('--') && next.length > 2)) throw new UsageError(`option --${name} needs a value`, usage);
      value = next;
      i++;
    }
    if (spec.multiple) {
      const list = (flags[name] as string[] | undefined) ?? [];
      list.push(String(value));
      flags[name] = list;
    } else {
      if (name in flags) throw new UsageError(`option --${name} is given twice`, usage);
      flags[name] = value;
    }
  }

  if (!help) {
    const max = options.maxPositionals ?? 0;
    if (positionals.length > max) {
      throw new UsageError(
        max === 0 ? `unexpected argument "${positionals[0]}"` : `too many arguments: expected at most ${max}, got ${positionals.length}`,
        usage,
      );
    }
    for (const [name, spec] of Object.entries(specs)) {
      if (spec.required && !(name in flags)) throw new UsageError(`option --${name} is required`, usage);
    }
  }
  return { flags, positionals, help };
}

/** The string value of a single-valued flag, or undefined. */
export function stringFlag(args: ParsedArgs, name: string): string | undefined {
  const v = args.flags[name];
  return typeof v === 'string' ? v : undefined;
}

/** The values of a repeated flag (empty when absent). */
export function listFlag(args: ParsedArgs, name: string): string[] {
  const v = args.flags[name];
  return Array.isArray(v) ? v : typeof v === 'string' ? [v] : [];
}

export function booleanFlag(args: ParsedArgs, name: string): boolean {
  return args.flags[name] === true;
}

/**
 * Parse a flag value as a finite number (integer when asked) within [min, max] when given, or a
 * usage error naming the flag and its range.
 */
export function numberFlag(args: ParsedArgs, name: string, opts: { integer?: boolean; usage?: string; min?: number; max?: number } = {}): number | undefined {
  const raw = stringFlag(args, name);
  if (raw === undefined) return undefined;
  // Decimal notation only: Number() would also read "0x10" as 16 and " 12 " as 12.
  const n = /^[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?$/.test(raw) ? Number(raw) : NaN;
  const range = opts.min !== undefined && opts.max !== undefined ? ` from ${opts.min} to ${opts.max}` : opts.min !== undefined ? ` >= ${opts.min}` : opts.max !== undefined ? ` <= ${opts.max}` : '';
  const kind = `${opts.integer ? 'an integer' : 'a number'}${range}`;
  if (!Number.isFinite(n) || (opts.integer && !Number.isInteger(n)) || (opts.min !== undefined && n < opts.min) || (opts.max !== undefined && n > opts.max)) {
    throw new UsageError(`option --${name} must be ${kind}, got "${raw.length > 40 ? raw.slice(0, 40) + '...' : raw}"`, opts.usage);
  }
  return n;
}
