/**
 * The post-fit steps of one large fit in a process of its own, for the post-fit threads benchmark
 * (posthocThreads.bench.ts): the invented sparse 2-cmt TDM design of workloads.ts with N
 * patients, fitted by SAEM on every core (the estimate does not depend on the threads), then
 * runPosthocOnThreads with its defaults on T threads. Usage: node posthocFit.js <patients>
 * <threads>; prints one JSON line: wall and CPU seconds of the post-fit steps, each step's
 * milliseconds, -2LL and the peak memory of the process.
 */
import { resourceUsage } from 'node:process';
import { runPosthocOnThreads } from '../../engine/posthoc/index.js';
import { runSaem } from '../../engine/saem/saem.js';
import { compileModel } from '../../engine/stats/model.js';
import { machineCores } from '../../main/services/coreSlots.js';
import { workerThreadHost } from '../../main/worker/saemThreads.js';
import { tdmDataset, tdmFit } from './workloads.js';

const patients = Number(process.argv[2]);
const threads = Number(process.argv[3] ?? 1);
if (!(Number.isInteger(patients) && patients >= 2 && Number.isInteger(threads) && threads >= 1)) {
  process.stderr.write('usage: node posthocFit.js <patients >= 2> <threads >= 1>\n');
  process.exit(2);
}
const model = compileModel(tdmFit, tdmDataset(patients, 77));
const cores = machineCores();
const fit = await runSaem(model, { seed: 5, ...(cores > 1 ? { threads: workerThreadHost(cores) } : {}) });
const cpu = () => {
  const u = process.cpuUsage();
  return (u.user + u.system) / 1e6;
};
const c0 = cpu();
const t0 = performance.now();
const r = await runPosthocOnThreads(model, fit.theta, { seed: 5, startPhi: fit.individualPhiMean, now: () => performance.now(), ...(threads > 1 ? { threads: workerThreadHost(threads) } : {}) });
const seconds = (performance.now() - t0) / 1000;
// CPU time covers every thread of the process.
process.stdout.write(
  JSON.stringify({ patients, threads, seconds, cpuSeconds: cpu() - c0, timingMs: r.timingMs, minus2LL: r.likelihood.importance?.minus2LL ?? null, replicates: r.diagnostics?.npde.replicates ?? 0, peakRssMiB: resourceUsage().maxRSS / 1024 }) + '\n',
);
