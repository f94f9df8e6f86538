/**
 * One fit on several threads (engine/saem/threads.ts): the speed-up of the invented sparse 2-cmt
 * TDM design at 4,000 patients on 2 threads against 1, and the 20,000-patient fit (500
 * iterations) on every core with its peak memory. Each fit runs in a process of its own
 * (largeFit.js) so that its memory is its own.
 */
import { spawnSync } from 'node:child_process';
import * as path from 'node:path';
import { fileURLToPath } from 'node:url';
import { machineCores } from '../../main/services/coreSlots.js';
import type { BenchFigure } from './run.js';

interface LargeFit {
  patients: number;
  threads: number;
  seconds: number;
  iterations: number;
  chains: number;
  peakRssMiB: number;
  evaluations: number;
  nsPerEvaluation: number;
}

function largeFit(patients: number, threads: number): LargeFit {
  const script = path.join(path.dirname(fileURLToPath(import.meta.url)), 'largeFit.js');
  const r = spawnSync(process.execPath, [script, String(patients), String(threads)], { encoding: 'utf8', timeout: 900_000 });
  if (r.status !== 0) throw new Error(`largeFit ${patients} ${threads} exited with ${r.status ?? r.signal}: ${(r.stderr || '').trim().split('\n').slice(-2).join(' ')}`);
  return JSON.parse(r.stdout.trim().split('\n').pop()!) as LargeFit;
}

export const suite = {
  name: 'threads',
  async run(): Promise<BenchFigure[]> {
    const figures: BenchFigure[] = [];
    const cores = machineCores();
    const one = largeFit(4000, 1);
    const two = largeFit(4000, 2);
    figures.push({ name: '4,000 patients, 500 iterations, 1 thread', value: one.seconds, unit: 's', note: `${one.chains} chains per patient; peak memory ${one.peakRssMiB.toFixed(0)} MiB` });
    figures.push({ name: '4,000 patients, 500 iterations, 2 threads', value: two.seconds, unit: 's', note: `peak memory ${two.peakRssMiB.toFixed(0)} MiB; identical estimates (tests/integration/fit/threads.test.ts)` });
    figures.push({ name: 'speed-up of one fit, 2 threads vs 1 (4,000 patients)', value: one.seconds / two.seconds, unit: 'x', target: '>= 1.7', note: `${cores} cores on this machine` });
    const big = largeFit(20_000, cores);
    figures.push({ name: `20,000 patients, 500 iterations, ${cores} threads`, value: big.seconds, unit: 's', target: '< 45', note: `${big.chains} chains per patient` });
    const floor = (big.evaluations * big.nsPerEvaluation) / 1e9;
    figures.push({
      name: '20,000 patients: model evaluations by the MCMC steps',
      value: big.evaluations / 1e6,
      unit: 'millions',
      note: `${big.chains} chains x 500 iterations x MH steps per chain; one costs ${big.nsPerEvaluation.toFixed(0)} ns on one core (predictions + log-likelihood, timed after the fit)`,
    });
    figures.push({
      name: `20,000 patients: those evaluations alone on ${cores} cores`,
      value: floor / cores,
      unit: 's',
      note: `${floor.toFixed(0)} s of one core's time; the floor under the fit's wall time without fewer or cheaper evaluations`,
    });
    figures.push({ name: '20,000 patients: peak resident memory of the fit process', value: big.peakRssMiB, unit: 'MiB', target: '< 1024', note: `${((big.peakRssMiB * 1024) / 20_000).toFixed(1)} KiB per patient, threads included` });
    return figures;
  },
};
