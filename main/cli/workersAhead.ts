/**
 * Engine worker processes started ahead (docs/architecture.md, "Command line"): `plateau fit`
 * starts its first worker process before it loads the fit's own modules and reads the inputs, so
 * the worker's start (node, its modules, its job thread) overlaps that work instead of following
 * it. This module loads nothing but the process spawner, so it can run first.
 *
 * A process started ahead is a plain WorkerHandle with no owner yet: what it says before an
 * owner (an EngineWorker, given `spawner` as its `spawn`) listens is held and handed over in
 * order when the owner starts listening, its exit included. Heartbeats are not held (the owner
 * counts silence from its own start), and no heartbeat watchdog runs before an owner exists, so a
 * long synchronous read in this process cannot make an idle worker look silent.
 */
import { spawnNodeWorker, type SpawnWorker, type WorkerEntry, type WorkerHandle } from '../services/workerSpawner.js';

const isHeartbeat = (m: unknown): boolean => typeof m === 'object' && m !== null && (m as { type?: unknown }).type === 'heartbeat';

/** A handle whose messages and exit are held until its first message listener is attached. */
function heldUntilHeard(h: WorkerHandle): WorkerHandle {
  const held: unknown[] = [];
  const messageListeners: ((m: unknown) => void)[] = [];
  const exitListeners: ((code: number | null, signal: string | null) => void)[] = [];
  let exited: [number | null, string | null] | undefined;
  let flowing = false;
  h.onMessage((m) => {
    if (flowing) for (const l of messageListeners) l(m);
    else if (!isHeartbeat(m)) held.push(m);
  });
  h.onExit((code, signal) => {
    exited = [code, signal];
    if (flowing) for (const l of exitListeners) l(code, signal);
  });
  // Deferred, so an owner attaches its exit listener too before anything is handed over.
  const flow = () => {
    if (flowing) return;
    flowing = true;
    for (const m of held.splice(0)) for (const l of messageListeners) l(m);
    if (exited) for (const l of exitListeners) l(exited[0], exited[1]);
  };
  return {
    postMessage: (m) => h.postMessage(m),
    onMessage(listener) {
      messageListeners.push(listener);
      queueMicrotask(flow);
    },
    onExit(listener) {
      exitListeners.push(listener);
      const e = exited;
      if (flowing && e) queueMicrotask(() => listener(e[0], e[1]));
    },
    kill: () => h.kill(),
    stderrTail: () => h.stderrTail(),
    get pid() {
      return h.pid;
    },
  };
}

const sameEntry = (a: WorkerEntry, b: WorkerEntry): boolean =>
  a.modulePath === b.modulePath && JSON.stringify(a.args ?? []) === JSON.stringify(b.args ?? []) && JSON.stringify(a.execArgv ?? []) === JSON.stringify(b.execArgv ?? []);

export class WorkersAhead {
  private readonly ahead: WorkerHandle[] = [];
  private readonly all: WorkerHandle[] = [];
  private closed = false;

  constructor(
    private readonly entry: WorkerEntry,
    private readonly spawnRaw: SpawnWorker = spawnNodeWorker,
  ) {}

  /** Start processes until `count` are waiting for an owner. */
  start(count: number): void {
    while (!this.closed && this.ahead.length < count) {
      const h = heldUntilHeard(this.spawnRaw(this.entry));
      this.ahead.push(h);
      this.all.push(h);
    }
  }

  /** Processes started and not yet taken. */
  get waiting(): number {
    return this.ahead.length;
  }

  /** A SpawnWorker for EngineWorker's options: a process started ahead when one waits (same entry), else a new one. */
  readonly spawner: SpawnWorker = (entry) => {
    const h = sameEntry(entry, this.entry) ? this.ahead.shift() : undefined;
    if (h) return h;
    const fresh = this.spawnRaw(entry);
    this.all.push(fresh);
    return fresh;
  };

  /** End every process this object started (taken or not): the command is over. */
  close(): void {
    this.closed = true;
    this.ahead.length = 0;
    for (const h of this.all.splice(0)) h.kill();
  }
}
