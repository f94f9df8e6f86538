/**
 * The post-fit steps of one fit on several threads (engine/posthoc/threads.ts): wall and CPU time
 * of every post-fit step of the invented sparse 2-cmt TDM design at 4,000 patients on 1 and 2
 * threads, each in a process of its own (posthocFit.js, which fits first on every core). The
 * two runs give the same numbers to the last bit (tests/integration/posthoc/threads.test.ts);
 * the -2LL of both is printed as a reminder. The linearisation, the VPC bands and the covariate
 * screens stay on the calling thread.
 */
import { spawnSync } from 'node:child_process';
import * as path from 'node:path';
import { fileURLToPath } from 'node:url';
import { machineCores } from '../../main/services/coreSlots.js';
import type { BenchFigure } from './run.js';

interface PosthocFit {
  patients: number;
  threads: number;
  seconds: number;
  cpuSeconds: number;
  timingMs: Record<string, number>;
  minus2LL: number | null;
  replicates: number;
  peakRssMiB: number;
}

function posthocFit(patients: number, threads: number): PosthocFit {
  const script = path.join(path.dirname(fileURLToPath(import.meta.url)), 'posthocFit.js');
  const r = spawnSync(process.execPath, [script, String(patients), String(threads)], { encoding: 'utf8', timeout: 900_000 });
  if (r.status !== 0) throw new Error(`posthocFit ${patients} ${threads} exited with ${r.status ?? r.signal}: ${(r.stderr || '').trim().split('\n').slice(-2).join(' ')}`);
  return JSON.parse(r.stdout.trim().split('\n').pop()!) as PosthocFit;
}

const steps = (t: Record<string, number>): string =>
  `modes ${(t.modes / 1000).toFixed(2)} s, conditional ${(t.conditional / 1000).toFixed(2)} s, Louis SE ${(t.standardErrors / 1000).toFixed(2)} s, linearised SE ${(t.standardErrorsLinearised / 1000).toFixed(2)} s, importance sampling ${(t.likelihood / 1000).toFixed(2)} s, diagnostics ${(t.diagnostics / 1000).toFixed(2)} s`;

export const suite = {
  name: 'posthocThreads',
  async run(): Promise<BenchFigure[]> {
    const cores = machineCores();
    const one = posthocFit(4000, 1);
    const two = posthocFit(4000, 2);
    return [
      { name: '4,000 patients, post-fit steps, 1 thread', value: one.seconds, unit: 's', note: `${one.cpuSeconds.toFixed(1)} s CPU; ${steps(one.timingMs)}; ${one.replicates} replicates` },
      { name: '4,000 patients, post-fit steps, 2 threads', value: two.seconds, unit: 's', note: `${two.cpuSeconds.toFixed(1)} s CPU; ${steps(two.timingMs)}; -2LL ${two.minus2LL} (1 thread: ${one.minus2LL})` },
      { name: 'speed-up of the post-fit steps, 2 threads vs 1 (4,000 patients)', value: one.seconds / two.seconds, unit: 'x', note: `${cores} cores on this machine; wall time moves with the machine's load` },
      { name: '4,000 patients: peak resident memory, post-fit on 2 threads', value: two.peakRssMiB, unit: 'MiB', note: `1 thread: ${one.peakRssMiB.toFixed(0)} MiB (each process holds its fit too)` },
    ];
  },
};
