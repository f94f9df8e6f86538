/** Chart.js configuration of the forecast: credible bands, median, measured levels, what-if, target band. */
import type { ChartConfiguration, ChartDataset } from 'chart.js';
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
  const annotations: Record<string, unknown> = {
    doseDueAt: {
      type: 'line',
      xMin: advice.patient.nextDoseH,
      xMax: advice.patient.nextDoseH,
      borderColor: '#4a5862',
      borderWidth: 1.5,
      borderDash: [4, 4],
      label: { display: true, content: advice.patient.nextDoseAssumed ? 'next dose (assumed)' : 'next dose', position: 'start', backgroundColor: 'rgba(74,88,98,0.85)', font: { size: 12 } },
    },
  };
  if (advice.regimenStart.delayed) {
    // The advice holds the next dose: mark where the advised regimen starts instead.
    annotations.regimenStart = { type: 'line', xMin: advice.regimenStart.timeH, xMax: advice.regimenStart.timeH, borderColor: '#8a3b12', borderWidth: 1.5, label: { display: true, content: 'advised restart (dose held)', position: 'end', backgroundColor: 'rgba(138,59,18,0.85)', font: { size: 12 } } };
  }
  for (const [i, g] of (target?.goals ?? []).entries()) {
    if ((g.metric === 'trough' || g.metric === 'peak' || g.metric === 'peakAt') && !g.perMic) {
      annotations[`goal${i}`] = { type: 'box', yMin: g.min ?? 0, yMax: g.max ?? undefined, xMin: advice.regimenStart.timeH, backgroundColor: COLOURS.target, borderWidth: 0, label: { display: true, content: `${g.metric} goal`, position: 'end', font: { size: 11 } } };
    }
  }
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
        legend: { labels: { filter: (item) => !/lower edge$/.test(item.text) } },
        annotation: { annotations } as never,
      },
    },
  };
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
