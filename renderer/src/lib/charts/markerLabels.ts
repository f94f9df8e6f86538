/**
 * Labels of vertical marker lines (next dose, advised restart) drawn in a strip of their own
 * between the legend and the plot, never over the curves, the bands or each other: each label
 * sits above its line (centred, or ending or starting at it), joined to it by a tick, and a label
 * that would touch another label or tick moves to the next row of the strip. The strip reserves
 * one row per marker (placeMarkerLabels says how a place is found).
 * Options: `plugins.markerLabels.markers = [{x, text, color}]` (x in the x axis's units).
 */
import { layouts, type Chart, type ChartArea, type ChartType, type LayoutItem, type LayoutPosition, type Plugin } from 'chart.js';

export interface MarkerLabel {
  /** Position on the x axis (its units, e.g. hours). */
  x: number;
  text: string;
  /** Background of the label and colour of its tick (white text on it). */
  color: string;
}

declare module 'chart.js' {
  // eslint-disable-next-line @typescript-eslint/no-unused-vars
  interface PluginOptionsByType<TType extends ChartType> {
    markerLabels?: { markers: MarkerLabel[] };
  }
}

export const MARKER_ROW_PX = 22;
const FONT_PX = 12;
const PAD_X = 6;
const GAP_PX = 4;

type Align = 'centre' | 'end' | 'start';
const ALIGNS: Align[] = ['centre', 'end', 'start'];
/** Up to this many labels every arrangement is searched; beyond, labels are placed one by one. */
const SEARCH_MAX = 4;

/**
 * Where each label goes: its left edge (kept inside 0..width) and its row (0 next to the plot,
 * at most n - 1 for n labels). A place is allowed when the label keeps `gapPx` from every label
 * of its row, its tick (straight down from its line's x to the plot) crosses no label of a lower
 * row, and it covers no tick of a label in a higher row: labels never overlap each other or a
 * tick. Each label may sit centred on its line, end at it or start at it. The arrangement chosen
 * uses the fewest rows, then the most centred labels; labels are taken in order of x. Such an
 * arrangement exists whenever the lines are more than `gapPx` apart and no label is pushed in by
 * the canvas edge (each label ending at its line, one row per label, is one). Only lines a few
 * pixels apart at the very edge of the plot can leave none; then a label takes the next row up
 * regardless of ticks (the ticks are drawn under the labels, so text still never overlaps).
 */
export function placeMarkerLabels(items: ReadonlyArray<{ px: number; widthPx: number }>, canvasWidthPx: number, gapPx = GAP_PX): { left: number; row: number }[] {
  const n = items.length;
  const order = items.map((it, i) => ({ ...it, i })).sort((a, b) => a.px - b.px || a.i - b.i);
  const clamp = (left: number, w: number) => Math.max(0, Math.min(left, canvasWidthPx - w));
  const at = (px: number, w: number, a: Align) => clamp(a === 'centre' ? px - w / 2 : a === 'end' ? px - w : px, w);
  type Box = { left: number; right: number; row: number; px: number; centred: boolean };
  const fits = (placed: Box[], b: Box) =>
    !placed.some(
      (p) =>
        (p.row === b.row && b.left < p.right + gapPx && b.right > p.left - gapPx) ||
        (p.row < b.row && b.px > p.left - gapPx && b.px < p.right + gapPx) ||
        (p.row > b.row && p.px > b.left - gapPx && p.px < b.right + gapPx),
    );
  const candidates = (k: number, maxRow: number): Box[] => {
    const it = order[k];
    const out: Box[] = [];
    for (let row = 0; row <= maxRow; row++)
      for (const a of ALIGNS) {
        const left = at(it.px, it.widthPx, a);
        out.push({ left, right: left + it.widthPx, row, px: it.px, centred: a === 'centre' });
      }
    return out;
  };
  let result: Box[] | undefined;
  if (n <= SEARCH_MAX) {
    // Fewest rows first; within them, the arrangement with the most centred labels.
    for (let rows = 1; rows <= n && !result; rows++) {
      let best: Box[] | undefined;
      let bestCentred = -1;
      const placed: Box[] = [];
      const search = (k: number, centred: number) => {
        if (bestCentred === n) return;
        if (k === n) {
          if (centred > bestCentred) {
            best = [...placed];
            bestCentred = centred;
          }
          return;
        }
        for (const b of candidates(k, rows - 1)) {
          if (!fits(placed, b)) continue;
          placed.push(b);
          search(k + 1, centred + (b.centred ? 1 : 0));
          placed.pop();
        }
      };
      search(0, 0);
      result = best;
    }
  }
  if (!result) {
    // Many labels, or no arrangement without a tick under a label: one by one, lowest row first.
    const placed: Box[] = [];
    for (let k = 0; k < n; k++) {
      const b = candidates(k, n - 1).find((c) => fits(placed, c)) ?? { ...candidates(k, 0)[0], row: Math.min(n - 1, Math.max(-1, ...placed.map((p) => p.row)) + 1) };
      placed.push(b);
    }
    result = placed;
  }
  const out: { left: number; row: number }[] = new Array(n);
  result.forEach((b, k) => (out[order[k].i] = { left: b.left, row: b.row }));
  return out;
}

/** The strip above the plot: a layout box as tall as the rows the markers may need. */
class MarkerStrip implements LayoutItem {
  position: LayoutPosition = 'top';
  // Between the plot (0) and the legend (1000): higher weights sit further from the plot.
  weight = 100;
  fullSize = false;
  // Read by chart.js's layout (boxes of one stack share a side); this box stacks with none.
  options = { stack: undefined as string | undefined, stackWeight: 1 };
  width = 0;
  height = 0;
  left = 0;
  top = 0;
  right = 0;
  bottom = 0;
  rows = 0;
  /** Rows found enough for these markers (their JSON) at the last drawing; until then one per marker. */
  plan: { key: string; rows: number } | undefined;
  update(width: number): void {
    this.width = width;
    this.height = this.rows * MARKER_ROW_PX;
  }
  isHorizontal(): boolean {
    return true;
  }
  draw(_area: ChartArea): void {
    // Drawn by the plugin after the datasets, when the x scale is known.
  }
}

const strips = new WeakMap<Chart, MarkerStrip>();

function markersOf(options: unknown): MarkerLabel[] {
  const list = (options as { markers?: unknown } | undefined)?.markers;
  if (!Array.isArray(list)) return [];
  return list
    .map((m) => ({ x: Number((m as MarkerLabel).x), text: String((m as MarkerLabel).text ?? ''), color: String((m as MarkerLabel).color ?? '#4a5862') }))
    .filter((m) => Number.isFinite(m.x) && m.text);
}

export const markerLabelsPlugin: Plugin = {
  id: 'markerLabels',
  defaults: { markers: [] },
  // The markers are plain values: no per-dataset picking from the list, no functions.
  ...({ descriptors: { _indexable: false, _scriptable: false } } as object),
  beforeInit(chart) {
    const strip = new MarkerStrip();
    strips.set(chart, strip);
    layouts.addBox(chart, strip);
  },
  beforeLayout(chart, _args, options) {
    const strip = strips.get(chart);
    if (!strip) return;
    const markers = markersOf(options);
    const key = JSON.stringify(markers);
    strip.rows = strip.plan?.key === key ? strip.plan.rows : markers.length;
  },
  afterDraw(chart, _args, options) {
    const markers = markersOf(options);
    const strip = strips.get(chart);
    const x = chart.scales.x;
    if (!markers.length || !strip || !x) return;
    const { ctx, chartArea } = chart;
    ctx.save();
    ctx.font = `600 ${FONT_PX}px ${String((chart.options.font as { family?: string } | undefined)?.family ?? 'sans-serif')}`;
    const shown = markers.map((m) => ({ m, px: x.getPixelForValue(m.x) })).filter((s) => s.px >= chartArea.left - 0.5 && s.px <= chartArea.right + 0.5);
    const spots = placeMarkerLabels(shown.map((s) => ({ px: s.px, widthPx: ctx.measureText(s.m.text).width + 2 * PAD_X })), chart.width);
    // The strip starts with one row per marker; once drawn, it keeps only the rows used (one
    // more layout), and goes back to one per marker if a later layout needs more. Never more
    // than two extra layouts for the same markers.
    const needed = spots.reduce((n, sp) => Math.max(n, sp.row + 1), 0);
    const key = JSON.stringify(markers);
    if (needed > strip.rows || (needed < strip.rows && strip.plan?.key !== key)) {
      strip.plan = { key, rows: needed > strip.rows ? markers.length : needed };
      requestAnimationFrame(() => {
        if (strips.get(chart) === strip) chart.update('none');
      });
    }
    // A label whose row this layout has not reserved waits for the next layout (never drawn over the legend).
    const boxes = shown
      .map(({ m, px }, i) => {
        const w = ctx.measureText(m.text).width + 2 * PAD_X;
        const bottom = chartArea.top - 3 - spots[i].row * MARKER_ROW_PX;
        return { m, px, w, row: spots[i].row, left: spots[i].left, bottom, top: bottom - (MARKER_ROW_PX - 5) };
      })
      .filter((b) => b.row < strip.rows);
    // Ticks first, from each label down to the plot; the labels over them.
    ctx.lineWidth = 1.5;
    for (const b of boxes) {
      ctx.strokeStyle = b.m.color;
      ctx.beginPath();
      ctx.moveTo(b.px, b.bottom);
      ctx.lineTo(b.px, chartArea.top);
      ctx.stroke();
    }
    ctx.textBaseline = 'middle';
    for (const b of boxes) {
      ctx.fillStyle = b.m.color;
      ctx.beginPath();
      ctx.roundRect(b.left, b.top, b.w, b.bottom - b.top, 4);
      ctx.fill();
      ctx.fillStyle = '#fff';
      ctx.fillText(b.m.text, b.left + PAD_X, (b.top + b.bottom) / 2 + 0.5);
    }
    ctx.restore();
  },
  afterDestroy(chart) {
    const strip = strips.get(chart);
    if (strip) layouts.removeBox(chart, strip);
    strips.delete(chart);
  },
};
