/**
 * The post-fit steps of one fit on several threads (the subject blocks of engine/parallel/tasks.ts,
 * as the estimator's engine/saem/threads.ts): the per-subject part of each costly step runs on
 * every block at once — conditional modes, conditional distributions (MCMC), Louis' terms,
 * importance sampling, and the simulations with PRED / IPRED / IWRES / NPDE. Every per-subject
 * output lives in a SharedArrayBuffer; each thread writes only its own subjects' entries, and each
 * subject draws from its own random stream (keyed by the seed, the step and the subject), so a
 * subject's numbers do not depend on which thread ran it. The calling thread then does every sum
 * over subjects (Louis' information, -2LL, its Monte Carlo error, counts, warnings) in subject
 * order, as the one-thread path does: the results are the same to the last bit on any number of
 * threads (tests/integration/posthoc/threads.test.ts). The VPC's replicates are split the same
 * way (each replicate's percentiles in each bin stand alone; the bins are computed identically on
 * every thread). What stays on the calling thread: the linearisation (a Hessian of one sum over
 * subjects, cheap), the shrinkage, the VPC bands and the covariate screens.
 */
import type { Dataset } from '../data/types.js';
import { allocateTaskWords, createTaskChannel, serveTasks, subjectRanges, type TaskChannel, type ThreadHandle } from '../parallel/tasks.js';
import type { ModelSpec } from '../spec/modelSpec.js';
import { compileModel, type CompiledModel, type PopulationParameters } from '../stats/model.js';
import { allocateConditional, conditionalKernel, type ConditionalOptions, type ConditionalResult } from './conditional.js';
import { buildDensity, type SubjectDensity } from './density.js';
import { allocateSimulation, simulationKernel, vpcKernel, type DiagnosticsOptions, type SimulationParts, type VpcPlan } from './diagnostics.js';
import { allocateLouis, louisKernel, type LouisParts } from './fisher.js';
import { allocateImportance, importanceKernel, type ImportanceOptions, type ImportanceResult } from './likelihood.js';
import { allocateModes, f64, modeKernel, type ModeResult } from './modes.js';
import { parameterLayout } from './parameters.js';

/** What a host gives the post-fit steps to run subject blocks on other threads. */
export interface PosthocThreadHost {
  /** Threads for the post-fit steps, the caller's included (1 = no other thread). */
  readonly threads: number;
  /** Start one block thread that runs `servePosthocThread(init)`; `ready` resolves once it waits for tasks. */
  start(init: PosthocThreadInit): ThreadHandle;
}

/** The per-subject outputs of the steps (over SharedArrayBuffers when threaded). */
export interface PosthocParts {
  start: Float64Array | null;
  modes: ModeResult;
  conditional: ConditionalResult;
  louis: LouisParts;
  importance: ImportanceResult & { impossible: Uint8Array };
  simulation: SimulationParts | null;
}

/** Everything a post-fit block thread needs (structured-cloneable; the typed arrays of `parts` share memory). */
export interface PosthocThreadInit {
  role: 'posthoc';
  spec: ModelSpec;
  dataset: Dataset;
  theta: PopulationParameters;
  thread: number;
  from: number;
  to: number;
  conditional: ConditionalOptions;
  importance: ImportanceOptions;
  diagnosticsSeed: number;
  vpcBins: number;
  vpcTime: DiagnosticsOptions['vpcTime'];
  /** This thread's replicates in the VPC summaries. */
  replicateFrom: number;
  replicateTo: number;
  parts: PosthocParts;
  control: SharedArrayBuffer;
  errorText: SharedArrayBuffer;
}

// Tasks (0 stops the threads).
const TASK_MODES = 1;
const TASK_CONDITIONAL = 2;
const TASK_LOUIS = 3;
const TASK_IMPORTANCE = 4;
const TASK_SIMULATION = 5;
const TASK_VPC = 6;

/** The post-fit steps' per-subject parts on one or several threads, seen from the calling thread. */
export interface PosthocBlocks {
  readonly threads: number;
  readonly parts: PosthocParts;
  /** Resolves when every block thread waits for tasks. */
  readonly ready: Promise<void>;
  modes(): void;
  conditional(): void;
  /** Louis' per-subject terms; returns whether Omega was positive definite. */
  louis(): boolean;
  importance(): void;
  simulation(): void;
  /** The VPC's replicate summaries, split by replicates (after simulation()). */
  vpc(): void;
  /** The VPC bins (for concludeDiagnostics). */
  vpcPlans(): VpcPlan[];
  close(): void;
}

export interface PosthocBlockOptions {
  start: Float64Array | undefined;
  conditional: ConditionalOptions;
  importance: ImportanceOptions;
  /** Replicates of the simulations, or null when the diagnostics are skipped. */
  replicates: number | null;
  diagnosticsSeed: number;
  vpcBins: number;
  vpcTime: DiagnosticsOptions['vpcTime'];
}

/** Allocate the parts (shared when `shared`). */
function allocateParts(model: CompiledModel, o: PosthocBlockOptions, shared: boolean): PosthocParts {
  let start: Float64Array | null = null;
  if (o.start) {
    start = f64(o.start.length, shared);
    start.set(o.start);
  }
  return {
    start,
    modes: allocateModes(model, shared),
    conditional: allocateConditional(model, o.conditional.keepDraws, shared),
    louis: allocateLouis(model, parameterLayout(model), shared),
    importance: allocateImportance(model, o.importance, shared),
    simulation: o.replicates === null ? null : allocateSimulation(model, o.replicates, o.vpcBins, shared),
  };
}

/** Every step's kernel over `parts`, built once (each allocates its own scratch). */
function kernels(density: SubjectDensity, parts: PosthocParts, conditional: ConditionalOptions, importance: ImportanceOptions, diagnosticsSeed: number, vpcBins: number, vpcTime: DiagnosticsOptions['vpcTime']) {
  const louis = louisKernel(density, parameterLayout(density.model), parts.conditional, parts.louis);
  return {
    modes: modeKernel(density, parts.modes, parts.start ?? undefined),
    conditional: conditionalKernel(density, parts.modes, parts.conditional, conditional),
    louis,
    importance: importanceKernel(density, parts.conditional, parts.modes, parts.importance, importance),
    simulation: parts.simulation ? simulationKernel(density, parts.modes, parts.simulation, diagnosticsSeed) : null,
    vpc: parts.simulation ? vpcKernel(density.model, parts.simulation, vpcBins, vpcTime) : null,
  };
}

/**
 * The blocks of the post-fit steps: with a host of more than one thread (and a catalogue model,
 * which a thread can compile again), shared buffers and block threads; otherwise the calling
 * thread alone over plain arrays, through the same kernels.
 */
export function createPosthocBlocks(density: SubjectDensity, o: PosthocBlockOptions, host?: PosthocThreadHost): PosthocBlocks {
  const model = density.model;
  const wanted = host && model.catalogueStructure ? host.threads : 1;
  const ranges = subjectRanges(model, wanted);
  const T = ranges.length;
  const parts = allocateParts(model, o, T > 1);
  const k = kernels(density, parts, o.conditional, o.importance, o.diagnosticsSeed, o.vpcBins, o.vpcTime);
  const { from, to } = ranges[0];
  // The VPC's replicates in T equal shares (each replicate's summaries stand alone).
  const K = o.replicates ?? 0;
  const replicateRange = (t: number) => ({ from: Math.floor((t * K) / T), to: Math.floor(((t + 1) * K) / T) });
  const noPlans = (): VpcPlan[] => {
    throw new Error('internal: no VPC without the diagnostics');
  };
  if (T === 1)
    return {
      threads: 1,
      parts,
      ready: Promise.resolve(),
      modes: () => k.modes.run(from, to),
      conditional: () => k.conditional.run(from, to),
      louis: () => (k.louis.run(from, to), k.louis.omegaOk),
      importance: () => k.importance.run(from, to),
      simulation: () => k.simulation?.run(from, to),
      vpc: () => k.vpc?.run(0, K),
      vpcPlans: () => (k.vpc ? k.vpc.plans() : noPlans()),
      close: () => undefined,
    };

  const words = allocateTaskWords();
  const handles: ThreadHandle[] = [];
  const channel: TaskChannel = createTaskChannel(words, T - 1, handles, {
    closed: 'internal: the post-fit threads were already stopped',
    stalled: 'a post-fit thread stopped responding',
    consequence: 'the post-fit steps were stopped',
    failed: 'a post-fit thread failed',
  });
  const theta = density.theta;
  for (let t = 1; t < T; t++)
    handles.push(
      host!.start({
        role: 'posthoc',
        spec: model.spec,
        dataset: model.dataset,
        theta: { mu: theta.mu, beta: theta.beta, omega: theta.omega, a: theta.a, b: theta.b },
        thread: t,
        from: ranges[t].from,
        to: ranges[t].to,
        conditional: o.conditional,
        importance: o.importance,
        diagnosticsSeed: o.diagnosticsSeed,
        vpcBins: o.vpcBins,
        vpcTime: o.vpcTime,
        replicateFrom: replicateRange(t).from,
        replicateTo: replicateRange(t).to,
        parts,
        control: words.control,
        errorText: words.errorText,
      }),
    );
  const close = () => channel.close();
  const ready = Promise.all(handles.map((h) => h.ready)).then(
    () => undefined,
    (e) => {
      close();
      throw e;
    },
  );
  return {
    threads: T,
    parts,
    ready,
    modes: () => channel.run(TASK_MODES, 0, () => k.modes.run(from, to)),
    conditional: () => channel.run(TASK_CONDITIONAL, 0, () => k.conditional.run(from, to)),
    louis: () => (channel.run(TASK_LOUIS, 0, () => k.louis.run(from, to)), k.louis.omegaOk),
    importance: () => channel.run(TASK_IMPORTANCE, 0, () => k.importance.run(from, to)),
    simulation: () => {
      if (k.simulation) channel.run(TASK_SIMULATION, 0, () => k.simulation!.run(from, to));
    },
    vpc: () => {
      if (k.vpc) channel.run(TASK_VPC, 0, () => k.vpc!.run(replicateRange(0).from, replicateRange(0).to));
    },
    vpcPlans: () => (k.vpc ? k.vpc.plans() : noPlans()),
    close,
  };
}

/** A post-fit block thread, prepared. */
export interface PosthocThread {
  /** Wait for tasks and run them until told to stop (blocks this thread). */
  serve(): void;
}

/** Prepare a post-fit block thread from its init (compiles the model for its subjects); throws on a bad init. */
export function preparePosthocThread(init: PosthocThreadInit): PosthocThread {
  const model = compileModel(init.spec, init.dataset, { preparedSubjects: { from: init.from, to: init.to } });
  const density = buildDensity(model, init.theta);
  if (!density) throw new Error('the estimated Omega is not positive definite');
  const k = kernels(density, init.parts, init.conditional, init.importance, init.diagnosticsSeed, init.vpcBins, init.vpcTime);
  const { from, to } = init;
  return {
    serve() {
      serveTasks({ control: init.control, errorText: init.errorText }, `post-fit thread ${init.thread} (subjects ${from + 1}-${to})`, (task) => {
        if (task === TASK_MODES) k.modes.run(from, to);
        else if (task === TASK_CONDITIONAL) k.conditional.run(from, to);
        else if (task === TASK_LOUIS) k.louis.run(from, to);
        else if (task === TASK_IMPORTANCE) k.importance.run(from, to);
        else if (task === TASK_SIMULATION) k.simulation?.run(from, to);
        else if (task === TASK_VPC) k.vpc?.run(init.replicateFrom, init.replicateTo);
        else throw new Error(`unknown post-fit task ${task}`);
      });
    },
  };
}
