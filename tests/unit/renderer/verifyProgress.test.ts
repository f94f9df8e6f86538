/** The verification view's check list, built from verify-progress events (renderer/src/features/verify/progress.ts). */
import { describe, expect, it } from 'vitest';
import { applyProgress, doneCount, emptyProgress } from '../../../renderer/src/features/verify/progress.js';

const ev = (index: number, status: 'running' | 'pass' | 'fail' | 'not-run', runId = 'run-a') => ({ runId, id: `c${index}`, title: `check ${index}`, index, total: 3, status });

describe('verification progress list', () => {
  it('adds each check when it starts and replaces it with its final state, in suite order', () => {
    let p = emptyProgress();
    p = applyProgress(p, ev(1, 'running'));
    expect(p.checks).toEqual([{ index: 1, id: 'c1', title: 'check 1', state: 'running' }]);
    p = applyProgress(p, ev(1, 'pass'));
    p = applyProgress(p, ev(2, 'running'));
    p = applyProgress(p, ev(2, 'fail'));
    p = applyProgress(p, ev(3, 'not-run'));
    expect(p.checks.map((c) => [c.id, c.state])).toEqual([['c1', 'pass'], ['c2', 'fail'], ['c3', 'not-run']]);
    expect(doneCount(p)).toBe(3);
    expect(p.total).toBe(3);
  });

  it('ignores events of another run once it has adopted a run id, and never changes the old list', () => {
    const first = applyProgress(emptyProgress(), ev(1, 'running', 'run-a'));
    const other = applyProgress(first, ev(2, 'running', 'run-b'));
    expect(other).toBe(first);
    const next = applyProgress(first, ev(1, 'pass', 'run-a'));
    expect(first.checks[0].state).toBe('running');
    expect(next.checks[0].state).toBe('pass');
    expect(doneCount(first)).toBe(0);
  });
});
