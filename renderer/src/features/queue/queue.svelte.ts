/**
 * Fit queue state: the queue snapshot the main side pushes after every change, and per running
 * job the history of its progress reports (estimates by iteration) for the live convergence
 * charts, with the iteration where the averaging phase began.
 */
import { request, subscribe } from '../../lib/bridge/index.js';
import { messageOf } from '../../lib/app.svelte.js';
import type { ProgressEvent, QueueJob, QueueSnapshot } from '../../lib/types.js';

export interface JobTrace {
  iterations: number[];
  /** Estimate name -> values aligned with iterations. */
  series: Map<string, number[]>;
  averagingFrom: number | null;
  phase: string;
}

/** At most this many points kept per job (older ones thinned), so long fits stay light. */
const MAX_POINTS = 600;

/** Add one progress report to a job's trace (pure; returns the same trace object, updated). */
export function addProgress(trace: JobTrace, p: ProgressEvent): JobTrace {
  trace.phase = p.phase;
  if (p.phase !== 'search' && p.phase !== 'averaging') return trace;
  if (p.phase === 'averaging' && trace.averagingFrom === null) trace.averagingFrom = p.iteration;
  const last = trace.iterations[trace.iterations.length - 1];
  if (last !== undefined && p.iteration <= last) return trace;
  trace.iterations.push(p.iteration);
  const n = trace.iterations.length;
  for (const [name, value] of Object.entries(p.estimates)) {
    let s = trace.series.get(name);
    if (!s) trace.series.set(name, (s = new Array(n - 1).fill(NaN)));
    s.push(value);
  }
  for (const s of trace.series.values()) if (s.length < n) s.push(NaN);
  if (n > MAX_POINTS) {
    const keep = (_: unknown, i: number) => i % 2 === 0 || i === n - 1;
    trace.iterations = trace.iterations.filter(keep);
    for (const [k, s] of trace.series) trace.series.set(k, s.filter(keep));
  }
  return trace;
}

export function emptyTrace(): JobTrace {
  return { iterations: [], series: new Map(), averagingFrom: null, phase: '' };
}

/** Seeds typed as "1, 2, 3": whole numbers 0..2^31-1; anything else is a problem, not dropped. */
export function parseSeeds(text: string): { seeds: number[]; problem?: string } {
  const parts = text.split(/[\s,;]+/).filter(Boolean);
  if (!parts.length) return { seeds: [], problem: 'Enter at least one seed (a whole number), e.g. 1 or 1, 2, 3.' };
  const seeds: number[] = [];
  for (const p of parts) {
    const n = Number(p);
    if (!Number.isInteger(n) || n < 0 || n > 2 ** 31 - 1) return { seeds: [], problem: `"${p}" is not a seed: use whole numbers from 0 to 2147483647.` };
    seeds.push(n);
  }
  if (seeds.length > 20) return { seeds: [], problem: 'At most 20 seeds at once.' };
  return { seeds };
}

export class QueueState {
  jobs = $state<QueueJob[]>([]);
  concurrency = $state(1);
  traces = $state.raw<Map<string, JobTrace>>(new Map());
  /** Bumped on every progress report so the charts redraw. */
  tick = $state(0);
  error = $state<string | null>(null);
  private stops: Array<() => void> = [];

  async start(): Promise<void> {
    this.stops.push(subscribe('queue', (s) => this.apply(s)));
    this.stops.push(
      subscribe('progress', (p) => {
        const t = this.traces.get(p.jobId) ?? emptyTrace();
        addProgress(t, p);
        if (!this.traces.has(p.jobId)) this.traces = new Map(this.traces).set(p.jobId, t);
        this.tick++;
      }),
    );
    try {
      this.apply(await request('queue.list'));
    } catch (e) {
      this.error = messageOf(e);
    }
  }

  stop(): void {
    for (const s of this.stops) s();
    this.stops = [];
  }

  apply(s: QueueSnapshot): void {
    this.jobs = s.jobs;
    this.concurrency = s.concurrency;
  }

  async enqueue(datasetId: string, modelId: string, seeds: number[], label?: string): Promise<boolean> {
    this.error = null;
    try {
      await request('queue.enqueue', { datasetId, modelId, seeds, ...(label ? { label } : {}) });
      return true;
    } catch (e) {
      this.error = messageOf(e);
      return false;
    }
  }

  async cancel(jobId: string): Promise<void> {
    try {
      this.apply(await request('queue.cancel', { jobId }));
    } catch (e) {
      this.error = messageOf(e);
    }
  }

  /** Move a queued job one place up (-1) or down (+1) among the queued jobs. */
  async move(jobId: string, by: -1 | 1): Promise<void> {
    const queued = this.jobs.filter((j) => j.state === 'queued').sort((a, b) => (a.position ?? 0) - (b.position ?? 0)).map((j) => j.id);
    const i = queued.indexOf(jobId);
    const k = i + by;
    if (i < 0 || k < 0 || k >= queued.length) return;
    [queued[i], queued[k]] = [queued[k], queued[i]];
    try {
      this.apply(await request('queue.reorder', { jobIds: queued }));
    } catch (e) {
      this.error = messageOf(e);
    }
  }

  async rerun(jobId: string, seeds: number[]): Promise<void> {
    try {
      await request('queue.rerun', { jobId, seeds });
    } catch (e) {
      this.error = messageOf(e);
    }
  }
}
