/** A CliIo that records what a command prints, for in-process CLI tests. */
import type { CliIo } from '../../main/cli/types.js';

export function captureIo(cwd: string): { io: CliIo; out: () => string; err: () => string } {
  const out: string[] = [];
  const err: string[] = [];
  return { io: { stdout: (t) => out.push(t), stderr: (t) => err.push(t), cwd }, out: () => out.join(''), err: () => err.join('') };
}
