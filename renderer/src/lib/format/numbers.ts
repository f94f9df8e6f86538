/**
 * Number formatting for the screens: a fixed number of significant digits (never more digits
 * than the data carry), units always beside the value, and a visible dash for a missing value.
 */

/** A dash for values that are missing or not finite, so a gap is never shown as 0. */
export const MISSING = '–';

/** x to `digits` significant digits, without exponent notation in the clinical range (1e-4 to 1e6). */
export function sig(x: number | null | undefined, digits = 3): string {
  if (x === null || x === undefined || !Number.isFinite(x)) return MISSING;
  if (x === 0) return '0';
  const a = Math.abs(x);
  if (a >= 1e6 || a < 1e-4) return x.toExponential(Math.max(0, digits - 1));
  // Round first, then count decimals from the rounded value (9.996 -> 10.0; 1234.5 -> 1230).
  const rounded = Number(x.toPrecision(digits));
  const decimals = Math.max(0, digits - 1 - Math.floor(Math.log10(Math.abs(rounded))));
  return rounded.toFixed(Math.min(decimals, 20));
}

/** Value with its unit, separated by a thin no-break space. */
export function withUnit(x: number | null | undefined, unit: string, digits = 3): string {
  const v = sig(x, digits);
  return v === MISSING || !unit ? v : `${v} ${unit}`;
}

/** A probability (0..1) as a whole percentage; below 1 % and above 99 % shown as such. */
export function percent(p: number | null | undefined): string {
  if (p === null || p === undefined || !Number.isFinite(p)) return MISSING;
  const v = 100 * p;
  if (v > 0 && v < 1) return '< 1 %';
  if (v < 100 && v > 99) return '> 99 %';
  return `${Math.round(v)} %`;
}

/** A percentage already on the 0..100 scale (RSE %, CV %, shrinkage %), to 2 significant digits (at least whole units). */
export function pct100(v: number | null | undefined): string {
  if (v === null || v === undefined || !Number.isFinite(v)) return MISSING;
  return `${Math.abs(v) >= 10 ? Math.round(v) : Number(v.toPrecision(2))} %`;
}

/** Seconds as "12 s", "3 min 05 s", "1 h 02 min". */
export function duration(seconds: number | null | undefined): string {
  if (seconds === null || seconds === undefined || !Number.isFinite(seconds) || seconds < 0) return MISSING;
  const s = Math.round(seconds);
  if (s < 60) return `${s} s`;
  if (s < 3600) return `${Math.floor(s / 60)} min ${String(s % 60).padStart(2, '0')} s`;
  return `${Math.floor(s / 3600)} h ${String(Math.floor((s % 3600) / 60)).padStart(2, '0')} min`;
}

/** Hours from the first event: "36 h" or "36.5 h" (to the minute as a decimal). */
export function hours(h: number | null | undefined): string {
  if (h === null || h === undefined || !Number.isFinite(h)) return MISSING;
  return `${Number(h.toFixed(2))} h`;
}

/** Coefficient of variation (%) of a log-normal random effect with SD omega on the log scale. */
export function cvFromLogSd(omega: number): number {
  return 100 * Math.sqrt(Math.expm1(omega * omega));
}

/**
 * A value with its Monte Carlo (or other) error: the error to 2 significant digits and the value
 * to the same decimal place ("596.91 ± 0.12"), so no digit is shown that the error makes noise.
 */
export function withError(x: number | null | undefined, err: number | null | undefined): string {
  if (x === null || x === undefined || !Number.isFinite(x)) return MISSING;
  if (err === null || err === undefined || !Number.isFinite(err) || err <= 0) return fixedLike(x, 1);
  const e = sig(err, 2);
  const decimals = e.includes('.') ? e.length - e.indexOf('.') - 1 : 0;
  return `${x.toFixed(decimals)} ± ${e}`;
}

/** x with a fixed number of decimals (for -2LL, AIC, BIC: differences matter, not digits). */
export function fixedLike(x: number | null | undefined, decimals: number): string {
  if (x === null || x === undefined || !Number.isFinite(x)) return MISSING;
  return x.toFixed(decimals);
}
