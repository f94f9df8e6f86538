/**
 * The list of checks of a running verification, built from the verify-progress events (pure,
 * so it is unit-tested without a page). Events of another run (another window started it) are
 * ignored once this list has adopted a run id.
 */
import type { VerifyProgressEvent } from '../../../../main/protocol/bridge.js';

export type CheckState = 'waiting' | 'running' | 'pass' | 'fail' | 'not-run';

export interface CheckLine {
  index: number;
  id: string;
  title: string;
  state: CheckState;
  durationMs?: number;
}

export interface RunProgress {
  runId: string | null;
  total: number;
  checks: CheckLine[];
}

export function emptyProgress(): RunProgress {
  return { runId: null, total: 0, checks: [] };
}

/** The progress with one event applied (a new object; the old one is not changed). */
export function applyProgress(p: RunProgress, e: VerifyProgressEvent): RunProgress {
  if (p.runId !== null && e.runId !== p.runId) return p;
  const checks = p.checks.slice();
  const line: CheckLine = { index: e.index, id: e.id, title: e.title, state: e.status, ...(e.durationMs !== undefined ? { durationMs: e.durationMs } : {}) };
  const at = checks.findIndex((c) => c.index === e.index);
  if (at >= 0) checks[at] = line;
  else checks.push(line);
  checks.sort((a, b) => a.index - b.index);
  return { runId: e.runId, total: e.total, checks };
}

/** Checks ended so far (any final state). */
export function doneCount(p: RunProgress): number {
  return p.checks.filter((c) => c.state !== 'running' && c.state !== 'waiting').length;
}

export const STATE_LABEL: Record<CheckState, string> = { waiting: 'waiting', running: 'running…', pass: 'PASS', fail: 'FAIL', 'not-run': 'not run (planned)' };
