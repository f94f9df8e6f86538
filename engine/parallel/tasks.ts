/**
 * Subject blocks on several threads over shared memory, the machinery shared by the estimator
 * (engine/saem/threads.ts) and the post-fit steps (engine/posthoc/threads.ts): the subjects are
 * cut into contiguous blocks of about equal work, one per thread (the calling thread keeps the
 * first), and a task runs on every block at once. The threads wait on an Atomics word between
 * tasks; a task is a few words of shared control (generation, task, flag, pending count, failure
 * and its text). Each thread writes only its own subjects' entries of shared arrays; whatever
 * sums over subjects is done afterwards by the calling thread in subject order, so results do not
 * depend on the number of threads.
 *
 * The engine knows no Node API: a host starts the threads (main/worker/saemThreads.ts uses
 * worker_threads) and each runs its side's `serveTasks` loop.
 */
import type { CompiledModel } from '../stats/model.js';

// The engine compiles with no ambient library beyond ES2023 (tsconfig.engine.json); both
// threads' hosts (Node, browsers) have these.
declare const TextEncoder: { new (): { encode(text: string): Uint8Array } };
declare const TextDecoder: { new (): { decode(bytes: Uint8Array): string } };

/** A started thread, seen from the calling thread. */
export interface ThreadHandle {
  /** Resolves once the thread waits for tasks; rejects with the reason it could not start. */
  readonly ready: Promise<void>;
  terminate(): void;
}

// Control words.
const GENERATION = 0;
const TASK = 1;
const FLAG = 2;
const PENDING = 3;
const FAILED = 4;
const ERROR_LENGTH = 5;
const CONTROL_WORDS = 8;
/** Task 0 stops the threads; a side numbers its own tasks from 1. */
export const TASK_STOP = 0;

const ERROR_BYTES = 2048;
/** A thread that has not finished its task after this long is taken as stopped. */
const STALL_MS = 120_000;

/** The shared words of a set of threads (structured-cloneable). */
export interface TaskWords {
  control: SharedArrayBuffer;
  errorText: SharedArrayBuffer;
}

export function allocateTaskWords(): TaskWords {
  return { control: new SharedArrayBuffer(4 * CONTROL_WORDS), errorText: new SharedArrayBuffer(ERROR_BYTES) };
}

/** Subject ranges of about equal work (levels + doses + 1 per subject), at least 2 subjects each. */
export function subjectRanges(model: CompiledModel, threads: number): { from: number; to: number }[] {
  const N = model.nSubjects;
  const T = Math.max(1, Math.min(Math.floor(threads), Math.floor(N / 2)));
  const weight = model.subjects.map((s) => 1 + s.nObs + s.doses.length);
  const total = weight.reduce((a, b) => a + b, 0);
  const ranges: { from: number; to: number }[] = [];
  let from = 0;
  let acc = 0;
  for (let t = 0; t < T; t++) {
    if (t === T - 1) {
      ranges.push({ from, to: N });
      break;
    }
    const goal = (total * (t + 1)) / T;
    let to = from;
    while (to < N - 2 * (T - 1 - t) && (to - from < 2 || acc + weight[to] / 2 <= goal)) acc += weight[to++];
    ranges.push({ from, to });
    from = to;
  }
  return ranges;
}

/** Words of the error messages, so each side names its own threads ("fit", "post-fit"). */
export interface TaskWording {
  /** Thrown when a task is posted after close. */
  closed: string;
  /** Start of the message when a thread stalls: "<stalled> (no answer for 120 s); <consequence>". */
  stalled: string;
  /** What follows the stall. */
  consequence: string;
  /** Start of the message when a thread failed: "<failed>: <the thread's text>". */
  failed: string;
}

/** The calling thread's side of the tasks. */
export interface TaskChannel {
  /** True once closed. */
  readonly closed: boolean;
  /** Hand `task` (with `flag`) to every other thread, run `local` here, wait for the others; throws when one failed or stalled. */
  run(task: number, flag: number, local: () => void): void;
  /** Stop the threads (idempotent). */
  close(): void;
}

/** The channel over `words` to `others` threads started with `handles` (terminated on close). */
export function createTaskChannel(words: TaskWords, others: number, handles: readonly ThreadHandle[], wording: TaskWording): TaskChannel {
  const control = new Int32Array(words.control);
  const errorText = new Uint8Array(words.errorText);
  let closed = false;
  const close = () => {
    if (closed) return;
    closed = true;
    Atomics.store(control, TASK, TASK_STOP);
    Atomics.add(control, GENERATION, 1);
    Atomics.notify(control, GENERATION);
    for (const h of handles) h.terminate();
  };
  return {
    get closed() {
      return closed;
    },
    close,
    run(task, flag, local) {
      if (closed) throw new Error(wording.closed);
      Atomics.store(control, TASK, task);
      Atomics.store(control, FLAG, flag);
      Atomics.store(control, PENDING, others);
      Atomics.add(control, GENERATION, 1);
      Atomics.notify(control, GENERATION);
      local();
      let pending = Atomics.load(control, PENDING);
      let since = Date.now();
      while (pending !== 0) {
        Atomics.wait(control, PENDING, pending, 1000);
        const now = Atomics.load(control, PENDING);
        if (now !== pending) {
          pending = now;
          since = Date.now();
        } else if (Date.now() - since > STALL_MS) {
          close();
          throw new Error(`${wording.stalled} (no answer for ${STALL_MS / 1000} s); ${wording.consequence}`);
        }
      }
      if (Atomics.load(control, FAILED)) {
        const text = new TextDecoder().decode(errorText.slice(0, Atomics.load(control, ERROR_LENGTH)));
        close();
        throw new Error(`${wording.failed}: ${text}`);
      }
    },
  };
}

/**
 * A thread's side: wait for tasks and run `handle(task, flag)` on each until told to stop
 * (blocks this thread). An exception in a task is written to the shared error text, prefixed
 * with `label`, and fails the task for the calling thread.
 */
export function serveTasks(words: TaskWords, label: string, handle: (task: number, flag: number) => void): void {
  const control = new Int32Array(words.control);
  const errorText = new Uint8Array(words.errorText);
  // From generation 0: the first task may be posted before this thread gets here.
  let generation = 0;
  for (;;) {
    Atomics.wait(control, GENERATION, generation);
    generation = Atomics.load(control, GENERATION);
    const task = Atomics.load(control, TASK);
    if (task === TASK_STOP) return;
    try {
      handle(task, Atomics.load(control, FLAG));
    } catch (e) {
      const bytes = new TextEncoder().encode(`${label}: ${(e as Error)?.message ?? String(e)}`).slice(0, ERROR_BYTES);
      errorText.set(bytes);
      Atomics.store(control, ERROR_LENGTH, bytes.length);
      Atomics.store(control, FAILED, 1);
    }
    if (Atomics.sub(control, PENDING, 1) === 1) Atomics.notify(control, PENDING);
  }
}
