/**
 * Benchmark of the structural models: observation-evaluations per second per model (single
 * dose, 10 levels per patient), patient-evaluations per second for a 2-compartment infusion
 * history of 60 doses and 4 levels, and the cost ratio when the number of doses doubles.
 * Rates are per CPU-second of this process (process.cpuUsage), which other jobs on a shared
 * machine disturb less than wall time. Figures only; nothing here is asserted.
 */
import type { Dose } from '../../engine/data/types.js';
import { getStructuralModel } from '../../engine/models/catalogue.js';
import type { Predictor, StructureId } from '../../engine/models/types.js';

interface Figure { name: string; value: number; unit: string; target?: string; note?: string }

const LEVEL_TIMES = [0.5, 1, 1.5, 2, 3, 4, 6, 8, 12, 24];

/** CPU time of this process in ms: on a shared, loaded machine it tracks the work done better than wall time. */
function cpuMs(): number {
  const u = process.cpuUsage();
  return (u.user + u.system) / 1000;
}

/** Calls per CPU-second of predictor over a few parameter vectors, timed over about `seconds`. */
function callsPerSecond(predict: Predictor, paramSets: Float64Array[], nOut: number, seconds = 0.6): number {
  const out = new Float64Array(nOut);
  let sink = 0;
  const warm = cpuMs();
  while (cpuMs() - warm < 150) for (const p of paramSets) predict(p, out);
  let calls = 0;
  let batch = 1000;
  const t0 = cpuMs();
  let elapsed = 0;
  while (elapsed < seconds * 1000) {
    for (let i = 0; i < batch; i++) {
      predict(paramSets[i % paramSets.length], out);
      sink += out[0];
    }
    calls += batch;
    elapsed = cpuMs() - t0;
    if (elapsed < 50) batch *= 2;
  }
  if (!Number.isFinite(sink)) throw new Error('benchmark produced non-finite levels');
  return calls / (elapsed / 1000);
}

/** A handful of parameter vectors around the catalogue's starting values (so nothing can be cached). */
function paramSets(id: StructureId): Float64Array[] {
  const m = getStructuralModel(id);
  return [1, 1.1, 0.9, 1.05].map((f, j) =>
    Float64Array.from(m.parameters.map((p) => (p.name === 'F' ? 0.8 : p.name === 'tlag' ? 0.25 * j : p.defaultInitial * f))),
  );
}

/** Every 8 h, 1 h infusions; `irregular` moves each dose by a different odd number of minutes (as recorded clock times do), so no interval length repeats. */
function infusionHistory(nDoses: number, irregular = false): { doses: Dose[]; times: number[] } {
  const doses: Dose[] = Array.from({ length: nDoses }, (_, i) => ({
    timeH: 8 * i + (irregular ? ((i * 37) % 41) / 60 : 0),
    amountMg: 1000,
    route: 'infusion',
    durationH: irregular ? 1 + ((i * 13) % 7) / 60 : 1,
  }));
  const end = 8 * nDoses;
  return { doses, times: [end - 8.01, end - 7, end - 4, end - 0.01] };
}

export const suite = {
  name: 'models',
  run: async (): Promise<Figure[]> => {
    const figures: Figure[] = [];
    const single: [StructureId, Dose['route'], string?][] = [
      ['1cmt', 'oral', '>= 1e7'],
      ['1cmt', 'bolus'],
      ['1cmt', 'infusion'],
      ['2cmt', 'oral'],
      ['2cmt', 'infusion'],
      ['3cmt', 'oral'],
      ['3cmt', 'infusion'],
      ['1cmt-mm', 'oral'],
      ['1cmt-mm', 'infusion'],
    ];
    for (const [id, route, target] of single) {
      const dose: Dose = { timeH: 0, amountMg: 500, route, durationH: route === 'infusion' ? 1 : 0 };
      const predict = getStructuralModel(id).prepare([dose], LEVEL_TIMES);
      const cps = callsPerSecond(predict, paramSets(id), LEVEL_TIMES.length, id === '1cmt-mm' ? 0.4 : 0.6);
      figures.push({
        name: `${id} ${route} single dose`,
        value: cps * LEVEL_TIMES.length,
        unit: 'obs-evals/s',
        ...(target ? { target } : {}),
        note: `${LEVEL_TIMES.length} levels per call`,
      });
    }

    const perSecond = (nDoses: number, irregular = false): number => {
      const h = infusionHistory(nDoses, irregular);
      const predict = getStructuralModel('2cmt').prepare(h.doses, h.times);
      return callsPerSecond(predict, paramSets('2cmt'), h.times.length, 0.8);
    };
    const p60 = perSecond(60);
    figures.push({ name: '2cmt infusion history, 60 doses, 4 levels', value: p60, unit: 'patient-evals/s', target: '>= 2e5' });
    figures.push({
      name: '2cmt infusion history, 60 doses at irregular times, 4 levels',
      value: perSecond(60, true),
      unit: 'patient-evals/s',
      note: 'no interval length repeats: every interval computes its exponentials',
    });
    const p120 = perSecond(120);
    figures.push({
      name: 'cost ratio, 120 vs 60 doses (2cmt infusion)',
      value: p60 / p120,
      unit: 'x',
      target: '~2',
      note: 'cost grows with events + levels, not events x levels',
    });
    const mm = getStructuralModel('1cmt-mm');
    const h = infusionHistory(60);
    figures.push({
      name: '1cmt-mm infusion history, 60 doses, 4 levels',
      value: callsPerSecond(mm.prepare(h.doses, h.times), paramSets('1cmt-mm'), 4, 0.5),
      unit: 'patient-evals/s',
    });
    return figures;
  },
};
