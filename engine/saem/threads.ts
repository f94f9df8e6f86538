/**
 * One SAEM fit on several threads: the subjects are cut into contiguous blocks, one per thread
 * (the calling thread keeps the first), and the per-subject work of an iteration runs on every
 * block at once: the simulation step (kernels, censored draws, the subjects' own covariances),
 * the chain refresh after an M-step, and the Newton step's batch of stencil points. The chains'
 * arrays live in SharedArrayBuffers; each thread writes only its own subjects' entries, draws
 * from its own subjects' random streams (one per subject and chain, keyed by the seed), and the
 * calling thread does everything that sums over subjects (sufficient statistics, the Newton
 * objective, acceptance counts, which are integers) in subject-then-chain order. So a fit gives
 * the same numbers to the last bit on 1, 2 or 3 threads (tests/integration/fit/threads.test.ts).
 *
 * The engine knows no Node API: the host starts the block threads (main/worker/saemThreads.ts
 * uses worker_threads) and each runs `serveBlockThread` on what `BlockThreadInit` carries. The
 * threads wait on an Atomics word between tasks; a task is three to four words of shared control
 * plus the broadcast of theta, Omega's factor and the kernel scales.
 */
import type { Dataset } from '../data/types.js';
import { allocateTaskWords, createTaskChannel, serveTasks, subjectRanges, type ThreadHandle } from '../parallel/tasks.js';
import type { ModelSpec } from '../spec/modelSpec.js';
import { compileModel, type CompiledModel, type PopulationParameters } from '../stats/model.js';
import { allocateNewtonBatch, createNewtonBlock, newtonBatchSizes, type NewtonBatchBuffers, type NewtonBlock } from './newtonStep.js';
import type { SaemSettings } from './settings.js';
import {
  addAcceptance,
  allocateChainBuffers,
  chainBufferLengths,
  concludeSimulationStep,
  createOmegaFactor,
  createSimulationState,
  refreshChains,
  resetAcceptance,
  simulateSubjects,
  simulationStep,
  type ChainBuffers,
  type KernelAcceptance,
  type OmegaFactor,
  type SimulationState,
} from './simulation.js';

/** What a host gives the engine to run subject blocks on other threads. */
export interface SaemThreadHost {
  /** Threads for the fit, the caller's included (1 = no other thread). */
  readonly threads: number;
  /** Start one block thread that runs `serveBlockThread(init)`; `ready` resolves once it waits for tasks. */
  start(init: BlockThreadInit): BlockThreadHandle;
}

export type BlockThreadHandle = ThreadHandle;

/** Everything a block thread needs (structured-cloneable; the buffers are shared). */
export interface BlockThreadInit {
  spec: ModelSpec;
  dataset: Dataset;
  settings: SaemSettings;
  chains: number;
  thread: number;
  from: number;
  to: number;
  chainBuffers: Record<keyof ChainBuffers, SharedArrayBuffer>;
  newtonBuffers: Record<keyof NewtonBatchBuffers, SharedArrayBuffer>;
  control: SharedArrayBuffer;
  broadcast: SharedArrayBuffer;
  acceptance: SharedArrayBuffer;
  errorText: SharedArrayBuffer;
}

// Tasks (0 stops the threads: engine/parallel/tasks.ts).
const TASK_SIMULATE = 1;
const TASK_REFRESH = 2;
const TASK_NEWTON = 3;

/** The subject blocks of a fit, seen from the calling thread. */
export interface SubjectBlocks {
  /** Threads in use (1: the calling thread alone). */
  readonly threads: number;
  /** The calling thread's simulation state (its block; the chain arrays cover every subject). */
  readonly sim: SimulationState;
  readonly newtonBatch: NewtonBatchBuffers;
  /** Resolves when every block thread waits for tasks. */
  readonly ready: Promise<void>;
  /** The simulation step on every block, then the totals and the kernel adaptation. */
  simulate(theta: PopulationParameters, exploring: boolean): void;
  /** The chain refresh after an M-step on every block. */
  refresh(theta: PopulationParameters, structuralWithoutBsv: boolean): void;
  /** Every block evaluates the Newton batch. */
  evaluateNewton(theta: PopulationParameters): void;
  /** Stop the block threads (idempotent). */
  close(): void;
}

export { subjectRanges };

/** Layout of the broadcast words: theta, Omega's factor and the kernel scales. */
function broadcastLayout(model: CompiledModel) {
  const p = model.nParams;
  const T = model.covariateTerms.length;
  const e2 = model.nEta * model.nEta;
  const mu = 0;
  const beta = mu + p;
  const omega = beta + T;
  const a = omega + e2;
  const b = a + 1;
  const cholesky = b + 1;
  const inverse = cholesky + e2;
  const sd = inverse + e2;
  const kappa = sd + model.nEta;
  const subjectScale = kappa + 1;
  const componentScale = subjectScale + 1;
  return { mu, beta, omega, a, b, cholesky, inverse, sd, kappa, subjectScale, componentScale, length: componentScale + model.nEta };
}

const acceptanceWords = (nEta: number) => 6 + 2 * nEta;

function writeAcceptance(out: Float64Array, offset: number, acc: KernelAcceptance): void {
  out[offset] = acc.independentAccepted;
  out[offset + 1] = acc.independentTries;
  out[offset + 2] = acc.randomWalkAccepted;
  out[offset + 3] = acc.randomWalkTries;
  out[offset + 4] = acc.adaptiveAccepted;
  out[offset + 5] = acc.adaptiveTries;
  const nEta = acc.componentAccepted.length;
  for (let k = 0; k < nEta; k++) (out[offset + 6 + k] = acc.componentAccepted[k]), (out[offset + 6 + nEta + k] = acc.componentTries[k]);
}

function readAcceptance(from: Float64Array, offset: number, acc: KernelAcceptance): void {
  acc.independentAccepted = from[offset];
  acc.independentTries = from[offset + 1];
  acc.randomWalkAccepted = from[offset + 2];
  acc.randomWalkTries = from[offset + 3];
  acc.adaptiveAccepted = from[offset + 4];
  acc.adaptiveTries = from[offset + 5];
  const nEta = acc.componentAccepted.length;
  for (let k = 0; k < nEta; k++) (acc.componentAccepted[k] = from[offset + 6 + k]), (acc.componentTries[k] = from[offset + 6 + nEta + k]);
}

const sharedOf = (a: Float64Array | Int32Array | Uint8Array) => a.buffer as SharedArrayBuffer;

/**
 * The blocks of a fit: with a host and more than one thread, shared buffers and block threads;
 * otherwise the calling thread alone over plain arrays (the same code path per block).
 */
export function createSubjectBlocks(
  model: CompiledModel,
  settings: SaemSettings,
  chains: number,
  theta: PopulationParameters,
  omegaFactor: OmegaFactor,
  warnings: string[],
  host?: SaemThreadHost,
): SubjectBlocks {
  const wanted = host && model.catalogueStructure ? host.threads : 1;
  const ranges = subjectRanges(model, wanted);
  const T = ranges.length;
  const shared = T > 1;
  const chainBuffers = allocateChainBuffers(model, chains, shared);
  const sim = createSimulationState(model, settings, chains, theta, omegaFactor, warnings, { buffers: chainBuffers, from: ranges[0].from, to: ranges[0].to, initialise: true });
  const newtonBatch = allocateNewtonBatch(model, chains, shared);
  const newtonBlock = createNewtonBlock(model, sim, newtonBatch);

  if (T === 1)
    return {
      threads: 1,
      sim,
      newtonBatch,
      ready: Promise.resolve(),
      simulate: (th, exploring) => simulationStep(sim, th, exploring),
      refresh: (th, structural) => refreshChains(sim, th, structural),
      evaluateNewton: (th) => newtonBlock.evaluate(th),
      close: () => undefined,
    };

  const layout = broadcastLayout(model);
  const words = allocateTaskWords();
  const broadcast = new Float64Array(new SharedArrayBuffer(8 * layout.length));
  const nAcc = acceptanceWords(model.nEta);
  const acceptance = new Float64Array(new SharedArrayBuffer(8 * nAcc * T));
  const handles: BlockThreadHandle[] = [];
  const channel = createTaskChannel(words, T - 1, handles, {
    closed: 'internal: the fit threads were already stopped',
    stalled: 'a fit thread stopped responding',
    consequence: 'the fit was stopped',
    failed: 'a fit thread failed',
  });
  const close = () => channel.close();
  const chainShared = Object.fromEntries(Object.entries(chainBuffers).map(([k, v]) => [k, sharedOf(v)])) as BlockThreadInit['chainBuffers'];
  const newtonShared = Object.fromEntries(Object.entries(newtonBatch).map(([k, v]) => [k, sharedOf(v)])) as BlockThreadInit['newtonBuffers'];
  for (let t = 1; t < T; t++)
    handles.push(
      host!.start({
        spec: model.spec,
        dataset: model.dataset,
        settings,
        chains,
        thread: t,
        from: ranges[t].from,
        to: ranges[t].to,
        chainBuffers: chainShared,
        newtonBuffers: newtonShared,
        control: words.control,
        broadcast: sharedOf(broadcast),
        acceptance: sharedOf(acceptance),
        errorText: words.errorText,
      }),
    );
  const ready = Promise.all(handles.map((h) => h.ready)).then(
    () => undefined,
    (e) => {
      close();
      throw e;
    },
  );

  function publish(th: PopulationParameters): void {
    broadcast.set(th.mu, layout.mu);
    broadcast.set(th.beta, layout.beta);
    broadcast.set(th.omega, layout.omega);
    broadcast[layout.a] = th.a;
    broadcast[layout.b] = th.b;
    broadcast.set(omegaFactor.cholesky, layout.cholesky);
    broadcast.set(omegaFactor.inverse, layout.inverse);
    broadcast.set(omegaFactor.sd, layout.sd);
    broadcast[layout.kappa] = sim.kappa.scale[0];
    broadcast[layout.subjectScale] = sim.subjectScale.scale[0];
    broadcast.set(sim.componentScale.scale, layout.componentScale);
  }

  /** Hand `task` to every block thread, run `local` here, wait for the others. */
  function runTask(task: number, flag: number, th: PopulationParameters, local: () => void): void {
    if (channel.closed) throw new Error('internal: the fit threads were already stopped');
    publish(th);
    channel.run(task, flag, local);
  }

  const part = { ...sim.iterationAcceptance, componentAccepted: new Float64Array(model.nEta), componentTries: new Float64Array(model.nEta) };
  return {
    threads: T,
    sim,
    newtonBatch,
    ready,
    simulate(th, exploring) {
      resetAcceptance(sim.iterationAcceptance);
      runTask(TASK_SIMULATE, exploring ? 1 : 0, th, () => simulateSubjects(sim, th, exploring, sim.iterationAcceptance));
      for (let t = 1; t < T; t++) {
        readAcceptance(acceptance, t * nAcc, part);
        addAcceptance(sim.iterationAcceptance, part);
      }
      concludeSimulationStep(sim, exploring);
    },
    refresh(th, structural) {
      runTask(TASK_REFRESH, structural ? 1 : 0, th, () => refreshChains(sim, th, structural));
    },
    evaluateNewton(th) {
      runTask(TASK_NEWTON, 0, th, () => newtonBlock.evaluate(th));
    },
    close,
  };
}

/** A block thread, prepared: its compiled model, state over the shared buffers, its block. */
export interface BlockThread {
  /** Wait for tasks and run them until told to stop (blocks this thread). */
  serve(): void;
}

/** Prepare a block thread from its init (compiles the model for its subjects); throws on a bad init. */
export function prepareBlockThread(init: BlockThreadInit): BlockThread {
  const model = compileModel(init.spec, init.dataset, { preparedSubjects: { from: init.from, to: init.to } });
  const chains = init.chains;
  const f64 = (b: SharedArrayBuffer, n: number) => new Float64Array(b, 0, n);
  const lengths = chainBufferLengths(model, chains);
  const buffers: ChainBuffers = {
    phi: f64(init.chainBuffers.phi, lengths.phi),
    logLik: f64(init.chainBuffers.logLik, lengths.logLik),
    eta: f64(init.chainBuffers.eta, lengths.eta),
    meanPhi: f64(init.chainBuffers.meanPhi, lengths.meanPhi),
    predictions: f64(init.chainBuffers.predictions, lengths.predictions),
    levels: f64(init.chainBuffers.levels, lengths.levels),
  };
  const nb = init.newtonBuffers;
  const z = newtonBatchSizes(model, chains);
  const batch: NewtonBatchBuffers = {
    points: new Float64Array(nb.points, 0, z.points),
    pointStructural: new Int32Array(nb.pointStructural, 0, z.pointStructural),
    structuralFirstPoint: new Int32Array(nb.structuralFirstPoint, 0, z.structuralFirstPoint),
    counts: new Int32Array(nb.counts, 0, z.counts),
    predictions: new Float64Array(nb.predictions, 0, z.predictions),
    valid: new Uint8Array(nb.valid, 0, z.valid),
    logLik: new Float64Array(nb.logLik, 0, z.logLik),
  };
  const theta: PopulationParameters = {
    mu: new Float64Array(model.nParams),
    beta: new Float64Array(model.covariateTerms.length),
    omega: new Float64Array(model.nEta * model.nEta),
    a: 0,
    b: 0,
  };
  const omegaFactor = createOmegaFactor(model.nEta);
  const sim = createSimulationState(model, init.settings, chains, theta, omegaFactor, [], { buffers, from: init.from, to: init.to, initialise: false });
  const newtonBlock: NewtonBlock = createNewtonBlock(model, sim, batch);
  const layout = broadcastLayout(model);
  const broadcast = new Float64Array(init.broadcast);
  const acceptance = new Float64Array(init.acceptance);
  const nAcc = acceptanceWords(model.nEta);
  const nEta = model.nEta;

  function receive(): void {
    theta.mu.set(broadcast.subarray(layout.mu, layout.mu + theta.mu.length));
    theta.beta.set(broadcast.subarray(layout.beta, layout.beta + theta.beta.length));
    theta.omega.set(broadcast.subarray(layout.omega, layout.omega + nEta * nEta));
    theta.a = broadcast[layout.a];
    theta.b = broadcast[layout.b];
    omegaFactor.cholesky.set(broadcast.subarray(layout.cholesky, layout.cholesky + nEta * nEta));
    omegaFactor.inverse.set(broadcast.subarray(layout.inverse, layout.inverse + nEta * nEta));
    omegaFactor.sd.set(broadcast.subarray(layout.sd, layout.sd + nEta));
    sim.kappa.scale[0] = broadcast[layout.kappa];
    sim.subjectScale.scale[0] = broadcast[layout.subjectScale];
    sim.componentScale.scale.set(broadcast.subarray(layout.componentScale, layout.componentScale + nEta));
  }

  return {
    serve() {
      serveTasks({ control: init.control, errorText: init.errorText }, `thread ${init.thread} (subjects ${init.from + 1}-${init.to})`, (task, flagWord) => {
        receive();
        const flag = flagWord === 1;
        if (task === TASK_SIMULATE) {
          resetAcceptance(sim.iterationAcceptance);
          simulateSubjects(sim, theta, flag, sim.iterationAcceptance);
          writeAcceptance(acceptance, init.thread * nAcc, sim.iterationAcceptance);
        } else if (task === TASK_REFRESH) refreshChains(sim, theta, flag);
        else if (task === TASK_NEWTON) newtonBlock.evaluate(theta);
      });
    },
  };
}
