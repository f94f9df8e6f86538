/** Quantile summaries of Monte Carlo draws (type 7 linear interpolation; Hyndman & Fan, Am Stat 1996;50:361-365, from memory). */

export interface Band {
  median: number;
  mean: number;
  /** 95 % and 80 % central intervals. */
  q025: number;
  q10: number;
  q90: number;
  q975: number;
}

/** Quantile p of sorted values (ascending, NaN-free). */
export function quantileSorted(sorted: Float64Array, p: number, n: number = sorted.length): number {
  if (n === 0) return NaN;
  const h = (n - 1) * p;
  const lo = Math.floor(h);
  const hi = Math.min(n - 1, lo + 1);
  return sorted[lo] + (h - lo) * (sorted[hi] - sorted[lo]);
}

/** Rearrange a[lo..hi] so that a[k] is the value of rank k (Hoare's quickselect, median of three). */
function select(a: Float64Array, lo: number, hi: number, k: number): void {
  while (hi > lo) {
    const mid = (lo + hi) >>> 1;
    const x = a[lo];
    const y = a[mid];
    const z = a[hi];
    const pivot = x < y ? (y < z ? y : x < z ? z : x) : x < z ? x : y < z ? z : y;
    let i = lo;
    let j = hi;
    while (i <= j) {
      while (a[i] < pivot) i++;
      while (a[j] > pivot) j--;
      if (i <= j) {
        const t = a[i];
        a[i] = a[j];
        a[j] = t;
        i++;
        j--;
      }
    }
    if (k <= j) hi = j;
    else if (k >= i) lo = i;
    else return;
  }
}

const BAND_P = [0.025, 0.1, 0.5, 0.9, 0.975];

/**
 * Band of the finite values in `values`; `scratch` (same length or more) is overwritten. Order
 * statistics by successive selection (no full sort): each quantile needs ranks floor(h) and
 * floor(h) + 1, the latter the minimum of the part above.
 */
export function bandOf(values: Float64Array, scratch: Float64Array): Band {
  let n = 0;
  let sum = 0;
  for (let i = 0; i < values.length; i++) {
    const v = values[i];
    if (Number.isFinite(v)) {
      scratch[n++] = v;
      sum += v;
    }
  }
  const q: number[] = [];
  let from = 0;
  for (const p of BAND_P) {
    if (n === 0) {
      q.push(NaN);
      continue;
    }
    const h = (n - 1) * p;
    const k = Math.floor(h);
    select(scratch, from, n - 1, k);
    from = k;
    let next = scratch[k];
    if (k + 1 < n) {
      next = Infinity;
      for (let i = k + 1; i < n; i++) if (scratch[i] < next) next = scratch[i];
    }
    q.push(scratch[k] + (h - k) * (next - scratch[k]));
  }
  return { median: q[2], mean: n ? sum / n : NaN, q025: q[0], q10: q[1], q90: q[3], q975: q[4] };
}

/** Round for display and JSON: `digits` significant digits. */
export function sig(x: number, digits = 4): number {
  return Number.isFinite(x) ? Number(x.toPrecision(digits)) : x;
}
