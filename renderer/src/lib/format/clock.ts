/**
 * Ward clock times for a patient entered with dates and clock times: the engine works in hours
 * from the first dose, the ward reads "Tue 24 Nov 19:30". Local wall-clock arithmetic (no time
 * zone, as the patient was entered), the same as the engine's clockAt.
 */
import { parseLocalClock } from '../../../../engine/dosing/patient.js';

const DAYS = ['Sun', 'Mon', 'Tue', 'Wed', 'Thu', 'Fri', 'Sat'];
const MONTHS = ['Jan', 'Feb', 'Mar', 'Apr', 'May', 'Jun', 'Jul', 'Aug', 'Sep', 'Oct', 'Nov', 'Dec'];
const p2 = (x: number) => String(x).padStart(2, '0');

function at(origin: string, h: number): Date | undefined {
  const m = parseLocalClock(origin);
  if (m === undefined || !Number.isFinite(h)) return undefined;
  return new Date(Math.round((m + h * 60) * 60000));
}

/** "Tue 24 Nov 19:30" (or undefined without a clock origin). */
export function wardClock(origin: string | undefined, h: number): string | undefined {
  const d = origin ? at(origin, h) : undefined;
  if (!d) return undefined;
  return `${DAYS[d.getUTCDay()]} ${d.getUTCDate()} ${MONTHS[d.getUTCMonth()]} ${p2(d.getUTCHours())}:${p2(d.getUTCMinutes())}`;
}

/** Axis tick: "24 Nov 08:00" at midnight and noon-ish ticks alike (short enough for an axis). */
export function clockTick(origin: string, h: number): string {
  const d = at(origin, h);
  if (!d) return `${h} h`;
  return `${d.getUTCDate()} ${MONTHS[d.getUTCMonth()]} ${p2(d.getUTCHours())}:${p2(d.getUTCMinutes())}`;
}

/** A time for a table cell: the ward clock when there is one, else hours from the first dose. */
export function timeCell(origin: string | undefined, h: number): string {
  return wardClock(origin, h) ?? `${Number(h.toFixed(2))} h`;
}

/** A date-time as the ward writes it, 24-hour, for "printed at" lines: "2026-12-04 15:21". */
export function nowStamp(d = new Date()): string {
  return `${d.getFullYear()}-${p2(d.getMonth() + 1)}-${p2(d.getDate())} ${p2(d.getHours())}:${p2(d.getMinutes())}`;
}

/**
 * Hours (from the first dose) at which a time axis puts its ticks so they fall on round ward
 * times: every 6, 12 or 24 h on the clock (00:00, 06:00, ...), at most about 10 ticks.
 */
export function clockTickHours(origin: string, minH: number, maxH: number): number[] {
  const m = parseLocalClock(origin);
  if (m === undefined || !(maxH > minH)) return [];
  const span = maxH - minH;
  const step = [3, 6, 12, 24, 48].find((s) => span / s <= 10) ?? 72;
  const dayMin = ((m % 1440) + 1440) % 1440;
  const stepMin = Math.min(step, 24) * 60;
  const offH = ((stepMin - (dayMin % stepMin)) % stepMin) / 60; // first round time at or after the first dose
  const first = offH + Math.ceil((minH - offH) / step) * step;
  const out: number[] = [];
  for (let h = first; h <= maxH + 1e-9; h += step) out.push(h);
  return out;
}
