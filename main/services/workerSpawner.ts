/**
 * One interface for starting a worker process: Node's child_process.fork implements it here;
 * Electron's utilityProcess.fork will implement the same shape in main/electron.
 */
import { fork } from 'node:child_process';

export interface WorkerEntry {
  /** Absolute path of the compiled worker module. */
  modulePath: string;
  /** Extra V8/Node flags, e.g. --max-old-space-size=2048. */
  execArgv?: string[];
  /** Arguments after the module (process.argv[2...]), e.g. the engine worker's limits. */
  args?: string[];
}

export interface WorkerHandle {
  postMessage(message: unknown): void;
  onMessage(listener: (message: unknown) => void): void;
  /** Called once when the process has ended (code, or the signal that ended it). */
  onExit(listener: (code: number | null, signal: string | null) => void): void;
  /** Ends the process at once (SIGKILL); safe to call more than once. */
  kill(): void;
  /** Text the worker wrote to stderr (last 8 kB), for error messages. */
  stderrTail(): string;
  /** Operating-system process id, once known. */
  readonly pid?: number | undefined;
}

export type SpawnWorker = (entry: WorkerEntry) => WorkerHandle;

export const spawnNodeWorker: SpawnWorker = (entry) => {
  const child = fork(entry.modulePath, entry.args ?? [], {
    execArgv: entry.execArgv ?? [],
    stdio: ['ignore', 'ignore', 'pipe', 'ipc'],
    // Structured clone, so bytes (Uint8Array) cross as they are, as with Electron's utilityProcess.
    serialization: 'advanced',
    env: { ...process.env, NODE_OPTIONS: '' },
  });
  let tail = '';
  child.stderr?.setEncoding('utf8');
  child.stderr?.on('data', (chunk: string) => {
    tail = (tail + chunk).slice(-8192);
  });
  let exited = false;
  const exitListeners: ((code: number | null, signal: string | null) => void)[] = [];
  child.once('exit', (code, signal) => {
    exited = true;
    for (const l of exitListeners) l(code, signal);
  });
  child.on('error', () => {
    // 'exit' follows (or the spawn failed); the owner sees it through onExit.
  });
  return {
    postMessage(message) {
      if (!exited && child.connected) child.send(message as never);
    },
    onMessage(listener) {
      child.on('message', listener);
    },
    onExit(listener) {
      exitListeners.push(listener);
    },
    kill() {
      if (!exited) child.kill('SIGKILL');
    },
    stderrTail: () => tail,
    get pid() {
      return child.pid;
    },
  };
};
