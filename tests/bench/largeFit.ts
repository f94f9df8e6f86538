/**
 * One large fit in a process of its own, for the threads benchmark (threads.bench.ts), so that
 * its peak resident memory is the fit's alone: the invented sparse 2-cmt TDM design of
 * workloads.ts with N patients, 500 iterations (300 search + 200 averaging), on T threads.
 * Usage: node largeFit.js <patients> <threads>; prints one JSON line.
 * Beside the fit's time it states its arithmetic: how many model evaluations (one patient's
 * predictions and log-likelihood at one proposal) the Metropolis-Hastings steps made, and what
 * one costs on one core, timed afterwards around every patient's individual estimates; their product
 * over the threads is the floor under the fit's wall time on this machine.
 */
import { resourceUsage } from 'node:process';
import { runSaem } from '../../engine/saem/saem.js';
import { compileModel } from '../../engine/stats/model.js';
import { workerThreadHost } from '../../main/worker/saemThreads.js';
import { tdmDataset, tdmFit } from './workloads.js';

const patients = Number(process.argv[2]);
const threads = Number(process.argv[3] ?? 1);
if (!(Number.isInteger(patients) && patients >= 2 && Number.isInteger(threads) && threads >= 1)) {
  process.stderr.write('usage: node largeFit.js <patients >= 2> <threads >= 1>\n');
  process.exit(2);
}
const data = tdmDataset(patients, 77);
const model = compileModel(tdmFit, data);
const t0 = performance.now();
const result = await runSaem(model, { seed: 5, ...(threads > 1 ? { threads: workerThreadHost(threads) } : {}) });
const seconds = (performance.now() - t0) / 1000;
const peakRssMiB = resourceUsage().maxRSS / 1024;

// Proposals per patient, chain and iteration (engine/saem/simulation.ts): the independent and
// random-walk steps, one per BSV component in a component sweep, and the adaptive steps (on from
// the first iterations of the search, counted throughout: an upper bound).
const st = result.settings;
const perChainIteration = st.independentSteps + st.randomWalkSteps + st.componentSweeps * model.nEta + st.adaptiveSteps;
const evaluations = patients * result.chains * result.iterations * perChainIteration;
// Timed as the fit makes them: a patient's evaluations one after another (its chains and steps),
// at points around its individual estimate, so every exponential is computed afresh.
const p = model.nParams;
const phi = new Float64Array(p);
let sink = 0;
let rounds = 0;
const e0 = performance.now();
while (performance.now() - e0 < 2000 || rounds < 1) {
  for (let i = 0; i < patients; i++) {
    const at = result.individualPhiMean.subarray(i * p, (i + 1) * p);
    for (let k = 0; k < result.chains * perChainIteration; k++) {
      for (let j = 0; j < p; j++) phi[j] = at[j] + 0.01 * ((k + j) % 5 - 2);
      sink += model.subjectLogLik(i, phi, result.theta.a, result.theta.b);
    }
  }
  rounds++;
}
const nsPerEvaluation = ((performance.now() - e0) * 1e6) / (rounds * patients * result.chains * perChainIteration);
if (!Number.isFinite(sink)) process.stderr.write('note: a log-likelihood was not finite\n');
// maxRSS (KiB) covers the whole process: the block threads share it.
process.stdout.write(JSON.stringify({ patients, threads, seconds, iterations: result.iterations, chains: result.chains, peakRssMiB, evaluations, nsPerEvaluation }) + '\n');
