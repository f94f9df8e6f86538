/**
 * Chart.js configurations of the fit diagnostics, built from the fit record as stored (fit.json):
 * observed against predictions, residuals and NPDE, VPC / pcVPC, convergence, covariates,
 * individual fits. Pure functions of the record, so they are tested without a browser.
 */
import type { ChartConfiguration, ChartDataset } from 'chart.js';
import type { ObservationDiagnostics, VpcData } from '../../../../engine/posthoc/diagnostics.js';
import { COLOURS, SERIES } from '../../lib/charts/setup.js';
import { covariateLabel, covariateName } from '../../lib/format/covariates.js';

type Pt = { x: number; y: number };
type Scale = 'linear' | 'logarithmic';

/**
 * chart.js with `parsing: false` takes every dataset as sorted by x (it finds the visible points
 * and the axis range by bisection and from the first and last points): scatter data must be
 * sorted or points silently vanish and the axis shows only part of the range.
 */
export const byX = <T extends { x: number }>(points: T[]): T[] => points.sort((a, b) => a.x - b.x);

const axis = (text: string, type: Scale = 'linear', extra: Record<string, unknown> = {}) => ({ type, title: { display: true, text }, ...extra });

export function observedVsPredicted(obs: readonly ObservationDiagnostics[], which: 'pred' | 'ipred', log: boolean): ChartConfiguration<'scatter'> {
  const scale: Scale = log ? 'logarithmic' : 'linear';
  const pts = byX(obs.filter((o) => !o.censored && o[which] !== null && (!log || (o.dv > 0 && (o[which] as number) > 0))).map((o) => ({ x: o[which] as number, y: o.dv })));
  const cens = byX(obs.filter((o) => o.censored && o[which] !== null && (!log || (o.dv > 0 && (o[which] as number) > 0))).map((o) => ({ x: o[which] as number, y: o.dv })));
  const all = [...pts, ...cens];
  const lo = log ? Math.min(...all.map((p) => Math.min(p.x, p.y))) : 0;
  const hi = Math.max(1e-9, ...all.map((p) => Math.max(p.x, p.y)));
  const label = which === 'pred' ? 'population prediction PRED (mg/L)' : 'individual prediction IPRED (mg/L)';
  return {
    type: 'scatter',
    data: {
      datasets: [
        { label: 'Levels', data: pts, pointRadius: 3, backgroundColor: 'rgba(44,95,122,0.55)' },
        { label: 'Below LLOQ (at the LLOQ)', data: cens, pointRadius: 4, pointStyle: 'triangle', backgroundColor: COLOURS.second },
        { label: 'Line of identity', data: [{ x: lo, y: lo }, { x: hi, y: hi }], type: 'line' as never, borderColor: '#4a5862', borderWidth: 1, pointRadius: 0, showLine: true } as ChartDataset<'scatter'>,
      ],
    },
    options: { parsing: false, scales: { x: axis(label, scale), y: axis('observed (mg/L)', scale) } },
  };
}

export function residualPlot(obs: readonly ObservationDiagnostics[], which: 'iwres' | 'npde', against: 'time' | 'pred'): ChartConfiguration<'scatter'> {
  const pts: Pt[] = [];
  for (const o of obs) {
    const y = o[which];
    const x = against === 'time' ? o.timeH : o.pred;
    if (y === null || x === null || !Number.isFinite(y)) continue;
    pts.push({ x, y });
  }
  byX(pts);
  const xs = pts.map((p) => p.x);
  const x0 = Math.min(0, ...xs);
  const x1 = Math.max(1, ...xs);
  const ref = (y: number, dash: number[]): ChartDataset<'scatter'> => ({ label: `y = ${y}`, data: [{ x: x0, y }, { x: x1, y }], type: 'line' as never, showLine: true, borderColor: '#4a5862', borderWidth: 1, borderDash: dash, pointRadius: 0 }) as ChartDataset<'scatter'>;
  return {
    type: 'scatter',
    data: { datasets: [{ label: which === 'npde' ? 'NPDE' : 'IWRES', data: pts, pointRadius: 3, backgroundColor: 'rgba(44,95,122,0.55)' }, ref(0, []), ref(1.96, [5, 4]), ref(-1.96, [5, 4])] },
    options: {
      parsing: false,
      scales: { x: axis(against === 'time' ? 'time (h from the first event)' : 'population prediction PRED (mg/L)'), y: axis(which === 'npde' ? 'NPDE' : 'IWRES') },
      plugins: { legend: { labels: { filter: (i) => !/^y = /.test(i.text) } } },
    },
  };
}

export function vpcPlot(vpc: VpcData, obs: readonly ObservationDiagnostics[], log: boolean): ChartConfiguration<'line'> {
  const bins = vpc.bins;
  const mid = bins.map((b) => b.timeMidH);
  const band = (get: (b: VpcData['bins'][number]) => { lo: number | null; hi: number | null }, colour: string, label: string): ChartDataset<'line', Pt[]>[] => [
    { label, data: bins.map((b, i) => ({ x: mid[i], y: get(b).hi ?? NaN })), borderWidth: 0, pointRadius: 0, fill: '+1', backgroundColor: colour },
    { label: `${label} lower edge`, data: bins.map((b, i) => ({ x: mid[i], y: get(b).lo ?? NaN })), borderWidth: 0, pointRadius: 0, fill: false },
  ];
  const line = (get: (b: VpcData['bins'][number]) => number | null, label: string, dash: number[] = []): ChartDataset<'line', Pt[]> => ({ label, data: bins.map((b, i) => ({ x: mid[i], y: get(b) ?? NaN })), borderColor: COLOURS.observed, borderWidth: 2, borderDash: dash, pointRadius: 3, fill: false });
  const pc = vpc.predictionCorrected;
  const raw = pc ? [] : byX(obs.filter((o) => !o.censored).map((o) => ({ x: o.timeH, y: o.dv })));
  const pi = Math.round(vpc.piLevel * 100);
  return {
    type: 'line',
    data: {
      datasets: [
        ...band((b) => b.simulated.p95, 'rgba(44,95,122,0.18)', `simulated 95th percentile, ${pi} % PI`),
        ...band((b) => b.simulated.p50, 'rgba(179,92,0,0.20)', `simulated median, ${pi} % PI`),
        ...band((b) => b.simulated.p5, 'rgba(44,95,122,0.18)', `simulated 5th percentile, ${pi} % PI`),
        line((b) => b.observed.p50, 'observed median'),
        line((b) => b.observed.p5, 'observed 5th and 95th percentiles', [5, 4]),
        { ...line((b) => b.observed.p95, 'observed 95th percentile', [5, 4]) },
        ...(raw.length && vpc.timeScale === 'time' ? [{ label: 'observed levels', data: raw, showLine: false, pointRadius: 2, backgroundColor: 'rgba(28,39,48,0.35)', borderWidth: 0 } as ChartDataset<'line', Pt[]>] : []),
      ],
    },
    options: {
      parsing: false,
      scales: {
        x: axis(vpc.timeScale === 'timeAfterDose' ? 'time after the last dose (h)' : 'time (h from the first event)'),
        y: axis(pc ? 'prediction-corrected concentration (mg/L)' : 'concentration (mg/L)', log ? 'logarithmic' : 'linear'),
      },
      plugins: { legend: { labels: { filter: (i) => !/lower edge$|^observed 95th/.test(i.text) } } },
    },
  };
}

/** One small chart per population estimate against iteration, with the end of the search phase marked. */
export function convergenceChart(name: string, values: number[], searchEnd: number, colour = SERIES[0], iterations?: number[]): ChartConfiguration<'line'> {
  return {
    type: 'line',
    data: { datasets: [{ label: name, data: values.map((y, i) => ({ x: iterations ? iterations[i] : i + 1, y })), borderColor: colour, borderWidth: 1.5, pointRadius: 0, fill: false }] },
    options: {
      parsing: false,
      normalized: true,
      plugins: {
        legend: { display: false },
        title: { display: true, text: estimateTitle(name), font: { size: 13, weight: 'bold' } },
        annotation: {
          annotations: searchEnd > 0 ? { phase: { type: 'line', xMin: searchEnd, xMax: searchEnd, borderColor: COLOURS.second, borderWidth: 1.5, borderDash: [5, 4], label: { display: false } } } : {},
        } as never,
      },
      scales: { x: axis('iteration', 'linear', { ticks: { maxTicksLimit: 5 } }), y: { ticks: { maxTicksLimit: 4 } } },
    },
  };
}

/** Names of the fit's estimates in words for chart titles (residual_additive_mg_L -> "residual additive SD (mg/L)"). */
export function estimateTitle(name: string): string {
  if (name === 'residual_additive_mg_L') return 'residual additive SD (mg/L)';
  if (name === 'residual_proportional') return 'residual proportional (fraction)';
  if (name.startsWith('residual_')) return name.replace(/_/g, ' ');
  if (name.startsWith('bsv_')) return `BSV of ${name.slice(4)} (SD)`;
  return name;
}

export function covariateScatter(points: Pt[], parameter: string, covariate: string): ChartConfiguration<'scatter'> {
  return {
    type: 'scatter',
    data: { datasets: [{ label: `${parameter} (individual mode)`, data: byX([...points]), pointRadius: 3.5, backgroundColor: 'rgba(44,95,122,0.6)' }] },
    options: { parsing: false, scales: { x: axis(covariateLabel(covariate)), y: axis(`${parameter} (log axis)`, 'logarithmic') }, plugins: { legend: { display: false }, title: { display: true, text: `${parameter} vs ${covariateName(covariate)}`, font: { size: 12 } } } },
  };
}

/** One subject: individual curve (mode), population curve, levels, dose times. */
export function individualChart(subject: string, curve: { t: number[]; ipred: number[]; pred: number[] }, levels: Array<{ t: number; y: number; censored: boolean }>, doseTimes: number[]): ChartConfiguration<'line'> {
  const ann: Record<string, unknown> = {};
  doseTimes.slice(0, 60).forEach((t, i) => (ann[`d${i}`] = { type: 'line', xMin: t, xMax: t, borderColor: 'rgba(74,88,98,0.35)', borderWidth: 1 }));
  return {
    type: 'line',
    data: {
      datasets: [
        { label: 'individual (mode)', data: curve.t.map((x, i) => ({ x, y: curve.ipred[i] })), borderColor: COLOURS.main, borderWidth: 1.8, pointRadius: 0 },
        { label: 'population', data: curve.t.map((x, i) => ({ x, y: curve.pred[i] })), borderColor: COLOURS.second, borderWidth: 1.2, borderDash: [5, 4], pointRadius: 0 },
        { label: 'levels', data: levels.map((l) => ({ x: l.t, y: l.y })), showLine: false, pointRadius: 3.5, pointStyle: levels.map((l) => (l.censored ? 'triangle' : 'circle')) as never, backgroundColor: COLOURS.observed, borderColor: COLOURS.observed },
      ],
    },
    options: {
      parsing: false,
      plugins: { legend: { display: false }, title: { display: true, text: subject, font: { size: 12, weight: 'bold' } }, annotation: { annotations: ann } as never },
      scales: { x: axis('h', 'linear', { ticks: { maxTicksLimit: 5 } }), y: { min: 0, ticks: { maxTicksLimit: 4 }, title: { display: true, text: 'mg/L' } } },
    },
  };
}
