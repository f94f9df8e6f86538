/**
 * The labels of the Dosing chart's vertical lines: placed in a strip above the plot so they never
 * overlap each other or a tick (lib/charts/markerLabels.ts), and the forecast chart hands its
 * lines' labels to that strip instead of drawing them over the curves.
 */
import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { adviseDose } from '../../../engine/dosing/advise.js';
import { parsePatient } from '../../../engine/dosing/patient.js';
import { parseTarget, type TargetSpec } from '../../../engine/dosing/targets.js';
import { forecastChartConfig, goalBands } from '../../../renderer/src/features/dosing/forecastChart.js';
import { populationFrom } from '../../../renderer/src/features/dosing/whatIf.js';
import { placeMarkerLabels } from '../../../renderer/src/lib/charts/markerLabels.js';

const GAP = 4;

/** Seeded linear congruential generator (Numerical Recipes constants), for repeatable cases. */
function lcg(seed: number) {
  let s = seed >>> 0;
  return () => ((s = (Math.imul(s, 1664525) + 1013904223) >>> 0) / 2 ** 32);
}

function check(items: { px: number; widthPx: number }[], canvas: number, ticksToo: boolean) {
  const spots = placeMarkerLabels(items, canvas, GAP);
  const boxes = spots.map((s, i) => ({ ...s, right: s.left + items[i].widthPx, px: items[i].px }));
  for (const b of boxes) {
    expect(b.row).toBeGreaterThanOrEqual(0);
    expect(b.row).toBeLessThan(items.length);
    expect(b.left).toBeGreaterThanOrEqual(0);
    expect(b.right).toBeLessThanOrEqual(canvas + 1e-9);
  }
  for (const [i, a] of boxes.entries())
    for (const [j, b] of boxes.entries()) {
      if (i === j) continue;
      if (a.row === b.row) expect(a.right + GAP <= b.left || b.right + GAP <= a.left, `labels ${i} and ${j} overlap in row ${a.row}`).toBe(true);
      // A tick runs from its label down to the plot: it must not pass through a label of a lower row.
      if (ticksToo && b.row < a.row) expect(a.px <= b.left - GAP || a.px >= b.right + GAP, `tick ${i} crosses label ${j}`).toBe(true);
    }
  return spots;
}

describe('labels of the chart lines', () => {
  it('puts one label centred on its line, and two close lines side by side in one row', () => {
    expect(placeMarkerLabels([{ px: 400, widthPx: 150 }], 800)).toEqual([{ left: 325, row: 0 }]);
    // The demo case: "next dose (assumed)" and "advised restart" about 40 px apart.
    const two = check([{ px: 574, widthPx: 153 }, { px: 613, widthPx: 197 }], 900, true);
    expect(two).toEqual([{ left: 574 - 153, row: 0 }, { left: 613, row: 0 }]);
    // Near the right edge a label is kept inside the canvas.
    expect(placeMarkerLabels([{ px: 790, widthPx: 150 }], 800)).toEqual([{ left: 650, row: 0 }]);
  });

  it('never overlaps labels (any lines), nor ticks when the lines are apart and inside the plot (seeded random cases)', () => {
    const r = lcg(20261204);
    for (let k = 0; k < 2000; k++) {
      const n = 1 + Math.floor(r() * 4);
      const anywhere = Array.from({ length: n }, () => ({ px: r() * 800, widthPx: 60 + r() * 160 }));
      check(anywhere, 800, false);
      // Lines at least 6 px apart, labels never clamped at the canvas edges.
      const xs: number[] = [];
      while (xs.length < n) {
        const x = 300 + r() * 400;
        if (xs.every((y) => Math.abs(x - y) >= 6)) xs.push(x);
      }
      check(xs.map((px) => ({ px, widthPx: 60 + r() * 160 })), 1000, true);
    }
  });

  it('the forecast chart labels its lines in the strip, not on the plot, and names goal bands in the legend', () => {
    const json = (p: string) => JSON.parse(readFileSync(new URL(`../../../${p}`, import.meta.url), 'utf8'));
    const spec = json('resources/demo/ward-model.json');
    const target = parseTarget(json('resources/targets/vancomycin-auc24.json'));
    const advice = adviseDose({ population: populationFrom({ spec }), patient: parsePatient(json('resources/demo/patient.json')), target, caution: 'caution', seed: 3, engineVersion: 'test', overrideBlocks: true, draws: 400 });
    const trough: TargetSpec = { ...target, goals: [{ metric: 'trough', min: 10, max: 15 } as TargetSpec['goals'][number]] };
    const cfg = forecastChartConfig(advice as never, advice.forecast ?? null, null, trough);
    const plugins = cfg.options!.plugins as Record<string, any>;
    const markers = plugins.markerLabels.markers as { x: number; text: string }[];
    expect(markers[0]).toMatchObject({ x: advice.patient.nextDoseH, text: advice.patient.nextDoseAssumed ? 'next dose (assumed)' : 'next dose' });
    expect(markers.length).toBe(advice.regimenStart.delayed ? 2 : 1);
    for (const a of Object.values(plugins.annotation.annotations as Record<string, { label?: unknown }>)) expect(a.label).toBeUndefined();
    // The goal bands' keys, with their units, for the legend (drawn in the browser: see the UI screenshots).
    expect(goalBands(trough).map((g) => g.text)).toEqual(['trough goal 10–15 mg/L']);
    expect(goalBands(parseTarget(json('resources/targets/aminoglycoside-peak-mic.json'))).map((g) => g.text)).toEqual(['trough goal below 1 mg/L']);
    expect(plugins.annotation.annotations.goal0).toMatchObject({ type: 'box', yMin: 10, yMax: 15 });
  });
});
