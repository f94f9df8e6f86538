/** Chart.js configuration of the forecast: credible bands, median, measured levels, what-if, target band. */
import { Chart, type ChartConfiguration, type ChartDataset } from 'chart.js';
import type { MarkerLabel } from '../../lib/charts/markerLabels.js';
import type { Forecast } from '../../../../engine/dosing/forecast.js';
import type { TargetSpec } from '../../../../engine/dosing/targets.js';
import { COLOURS } from '../../lib/charts/setup.js';
import { clockTick, clockTickHours } from '../../lib/format/clock.js';
import type { Advice } from './types.js';

type Pt = { x: number; y: number };
const pts = (t: number[], y: number[]): Pt[] => t.map((x, i) => ({ x, y: y[i] }));

export function forecastChartConfig(advice: Advice, fc: Forecast | null, whatIf: Forecast | null, target: TargetSpec | null, logScale = false): ChartConfiguration<'line'> {
  const datasets: ChartDataset<'line', Pt[]>[] = [];
  const c = fc?.curve;
  if (c) {
    datasets.push({ label: '95 % credible band', data: pts(c.timesH, c.q975), borderWidth: 0, pointRadius: 0, fill: '+1', backgroundColor: COLOURS.band95 });
    datasets.push({ label: '95 % lower edge', data: pts(c.timesH, c.q025), borderWidth: 0, pointRadius: 0, fill: false });
    datasets.push({ label: '80 % credible band', data: pts(c.timesH, c.q90), borderWidth: 0, pointRadius: 0, fill: '+1', backgroundColor: COLOURS.band80 });
    datasets.push({ label: '80 % lower edge', data: pts(c.timesH, c.q10), borderWidth: 0, pointRadius: 0, fill: false });
    datasets.push({ label: 'Median forecast (recommended regimen)', data: pts(c.timesH, c.median), borderColor: COLOURS.main, borderWidth: 2.5, pointRadius: 0, fill: false });
  }
  if (whatIf) {
    const w = whatIf.curve;
    datasets.push({ label: 'What-if median', data: pts(w.timesH, w.median), borderColor: COLOURS.second, borderWidth: 2.5, borderDash: [7, 4], pointRadius: 0, fill: false });
    datasets.push({ label: 'What-if 80 % band', data: pts(w.timesH, w.q90), borderColor: COLOURS.second, borderWidth: 1, borderDash: [2, 3], pointRadius: 0, fill: false });
    datasets.push({ label: 'What-if 80 % lower edge', data: pts(w.timesH, w.q10), borderColor: COLOURS.second, borderWidth: 1, borderDash: [2, 3], pointRadius: 0, fill: false });
  }
  const measured = advice.posterior.levels;
  datasets.push({
    label: 'Measured levels',
    data: measured.map((l) => ({ x: l.timeH, y: l.concMgL })),
    showLine: false,
    pointRadius: 6,
    pointStyle: measured.map((l) => (l.censored ? 'triangle' : 'circle')) as never,
    pointBackgroundColor: COLOURS.observed,
    borderColor: COLOURS.observed,
  });
  // The vertical lines carry no label on the plot: their labels sit in a strip above it
  // (lib/charts/markerLabels.ts), so they never cover the curves, the levels or each other.
  const NEXT_DOSE_COLOUR = '#4a5862';
  const RESTART_COLOUR = '#8a3b12';
  const annotations: Record<string, unknown> = {
    doseDueAt: { type: 'line', xMin: advice.patient.nextDoseH, xMax: advice.patient.nextDoseH, borderColor: NEXT_DOSE_COLOUR, borderWidth: 1.5, borderDash: [4, 4] },
  };
  const markers: MarkerLabel[] = [{ x: advice.patient.nextDoseH, text: advice.patient.nextDoseAssumed ? 'next dose (assumed)' : 'next dose', color: NEXT_DOSE_COLOUR }];
  if (advice.regimenStart.delayed) {
    // The advice holds the next dose: mark where the advised regimen starts too.
    annotations.regimenStart = { type: 'line', xMin: advice.regimenStart.timeH, xMax: advice.regimenStart.timeH, borderColor: RESTART_COLOUR, borderWidth: 1.5 };
    markers.push({ x: advice.regimenStart.timeH, text: 'advised restart (dose held)', color: RESTART_COLOUR });
  }
  // Goal bands are named in the legend (a band has no single point to label on the plot).
  const goalKeys = goalBands(target);
  for (const g of goalKeys) annotations[`goal${g.index}`] = { type: 'box', yMin: g.min, yMax: g.max, xMin: advice.regimenStart.timeH, backgroundColor: COLOURS.target, borderWidth: 0 };
  return {
    type: 'line',
    data: { datasets },
    options: {
      parsing: false,
      normalized: true,
      interaction: { mode: 'nearest', intersect: false },
      scales: {
        x: xAxis(advice.patient.clockOrigin),
        y: { type: logScale ? 'logarithmic' : 'linear', title: { display: true, text: 'concentration (mg/L)' }, ...(logScale ? {} : { min: 0 }) },
      },
      plugins: {
        legend: {
          labels: {
            filter: (item) => !/lower edge$/.test(item.text),
            generateLabels: (chart) => [
              ...Chart.defaults.plugins.legend.labels.generateLabels(chart),
              ...goalKeys.map((k) => ({ text: k.text, fillStyle: COLOURS.target, strokeStyle: COLOURS.third, lineWidth: 1, hidden: false })),
            ],
          },
          // The goal keys stand for no dataset: clicking them hides nothing.
          onClick: (e, item, legend) => {
            if (item.datasetIndex !== undefined) Chart.defaults.plugins.legend.onClick.call(legend, e, item, legend);
          },
        },
        annotation: { annotations } as never,
        markerLabels: { markers },
      },
    },
  };
}

/** The concentration goals drawn as bands, each with its legend text (metric, bounds, unit). */
export function goalBands(target: TargetSpec | null): { index: number; min: number; max: number | undefined; text: string }[] {
  const out: { index: number; min: number; max: number | undefined; text: string }[] = [];
  for (const [index, g] of (target?.goals ?? []).entries()) {
    if ((g.metric === 'trough' || g.metric === 'peak' || g.metric === 'peakAt') && !g.perMic) {
      const range = g.min !== undefined && g.max !== undefined ? `${g.min}–${g.max} mg/L` : g.min !== undefined ? `at least ${g.min} mg/L` : g.max !== undefined ? `below ${g.max} mg/L` : '';
      out.push({ index, min: g.min ?? 0, max: g.max ?? undefined, text: `${g.metric === 'peakAt' ? 'peak' : g.metric} goal${range ? ` ${range}` : ''}` });
    }
  }
  return out;
}

/** Time axis: ward clock ticks ("24 Nov" over "08:00") for a clock-entered patient, else hours from the first dose. */
function xAxis(origin: string | undefined): Record<string, unknown> {
  if (!origin) return { type: 'linear', title: { display: true, text: 'time (h from the first dose)' } };
  return {
    type: 'linear',
    title: { display: true, text: 'ward clock (date and time)' },
    afterBuildTicks: (axis: { min: number; max: number; ticks: Array<{ value: number }> }) => {
      const hs = clockTickHours(origin, axis.min, axis.max);
      if (hs.length) axis.ticks = hs.map((value) => ({ value }));
    },
    ticks: {
      callback: (v: number | string) => {
        const text = clockTick(origin, Number(v));
        const cut = text.lastIndexOf(' ');
        return [text.slice(0, cut), text.slice(cut + 1)];
      },
    },
  };
}
