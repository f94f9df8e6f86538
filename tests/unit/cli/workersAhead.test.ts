import { describe, expect, it } from 'vitest';
import { WorkersAhead } from '../../../main/cli/workersAhead.js';
import type { WorkerEntry, WorkerHandle } from '../../../main/services/workerSpawner.js';

/** A fake worker process: the test makes it speak and exit. */
function fakeSpawner() {
  const made: { entry: WorkerEntry; say(m: unknown): void; exit(code: number): void; killed: boolean }[] = [];
  const spawn = (entry: WorkerEntry): WorkerHandle => {
    const messageListeners: ((m: unknown) => void)[] = [];
    const exitListeners: ((c: number | null, s: string | null) => void)[] = [];
    const f = {
      entry,
      killed: false,
      say: (m: unknown) => messageListeners.forEach((l) => l(m)),
      exit: (code: number) => exitListeners.forEach((l) => l(code, null)),
    };
    made.push(f);
    return {
      postMessage: () => undefined,
      onMessage: (l) => void messageListeners.push(l),
      onExit: (l) => void exitListeners.push(l),
      kill: () => void (f.killed = true),
      stderrTail: () => '',
      pid: 1000 + made.length,
    };
  };
  return { made, spawn };
}

const tick = () => new Promise((r) => setTimeout(r, 0));

describe('WorkersAhead', () => {
  it('holds what a process says before its owner listens and hands it over in order, heartbeats left out, exit last', async () => {
    const fake = fakeSpawner();
    const ahead = new WorkersAhead({ modulePath: '/w.js', args: [] }, fake.spawn);
    ahead.start(1);
    expect(fake.made).toHaveLength(1);
    fake.made[0].say({ type: 'ready', pid: 1 });
    fake.made[0].say({ type: 'heartbeat', at: 1 });
    fake.made[0].say({ type: 'progress', n: 1 });
    fake.made[0].exit(3);
    const h = ahead.spawner({ modulePath: '/w.js', args: [] });
    const seen: unknown[] = [];
    h.onMessage((m) => seen.push(m));
    h.onExit((code) => seen.push(`exit ${code}`));
    expect(seen).toEqual([]); // handed over after the owner has attached both listeners
    await tick();
    expect(seen).toEqual([{ type: 'ready', pid: 1 }, { type: 'progress', n: 1 }, 'exit 3']);
    expect(fake.made).toHaveLength(1);
  });

  it('passes messages straight through once an owner listens', async () => {
    const fake = fakeSpawner();
    const ahead = new WorkersAhead({ modulePath: '/w.js', args: [] }, fake.spawn);
    ahead.start(1);
    const h = ahead.spawner({ modulePath: '/w.js', args: [] });
    const seen: unknown[] = [];
    h.onMessage((m) => seen.push(m));
    await tick();
    fake.made[0].say({ type: 'heartbeat', at: 2 });
    expect(seen).toEqual([{ type: 'heartbeat', at: 2 }]);
  });

  it('starts up to the count asked for, spawns anew when none waits or the entry differs, and ends every process on close', () => {
    const fake = fakeSpawner();
    const ahead = new WorkersAhead({ modulePath: '/w.js', args: [] }, fake.spawn);
    ahead.start(2);
    ahead.start(2);
    expect(fake.made).toHaveLength(2);
    expect(ahead.waiting).toBe(2);
    ahead.spawner({ modulePath: '/w.js', args: ['--job-heap-mb', '512'] });
    expect(fake.made).toHaveLength(3); // other arguments: a process of its own
    ahead.spawner({ modulePath: '/w.js', args: [] });
    ahead.spawner({ modulePath: '/w.js', args: [] });
    expect(ahead.waiting).toBe(0);
    ahead.spawner({ modulePath: '/w.js', args: [] });
    expect(fake.made).toHaveLength(4);
    ahead.close();
    expect(fake.made.every((f) => f.killed)).toBe(true);
    ahead.start(1);
    expect(fake.made).toHaveLength(4); // closed: nothing more starts
  });
});
