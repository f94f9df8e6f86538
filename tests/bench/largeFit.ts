/**
 * One large fit in a process of its own, for the threads benchmark (threads.bench.ts), so that
 * its peak resident memory is the fit's alone: the invented sparse 2-cmt TDM design of
 * workloads.ts with N patients, 500 iterations (300 search + 200 averaging), on T threads.
 * Usage: node largeFit.js <patients> <threads>; prints one JSON line.
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
// maxRSS (KiB) covers the whole process: the block threads share it.
process.stdout.write(JSON.stringify({ patients, threads, seconds, iterations: result.iterations, chains: result.chains, peakRssMiB: resourceUsage().maxRSS / 1024 }) + '\n');
