/**
 * log Phi(z), accurate in both tails, used by the censored likelihood. Kept here until the
 * shared engine/rng normal functions land; then this module re-exports those.
 * Method: Taylor series Phi(z) = 1/2 + phi(z) sum z^(2n+1)/(2n+1)!! for |z| < 3, and the
 * continued fraction of the Mills ratio (Abramowitz & Stegun 26.2.14, from memory) beyond.
 */
const LOG_SQRT_2PI = 0.5 * Math.log(2 * Math.PI);

/** Q(x) / phi(x) for x >= 3 by the Mills-ratio continued fraction (modified Lentz). */
function millsRatio(x: number): number {
  // R(x) = 1 / (x + 1 / (x + 2 / (x + 3 / (x + ...))))
  const tiny = 1e-300;
  let fr = x;
  let c = x;
  let d = 0;
  for (let n = 1; n < 500; n++) {
    d = x + n * d;
    if (d === 0) d = tiny;
    c = x + n / c;
    if (c === 0) c = tiny;
    d = 1 / d;
    const delta = c * d;
    fr *= delta;
    if (Math.abs(delta - 1) < 1e-16) break;
  }
  return 1 / fr;
}

/** Phi(z) - 1/2 = phi(z) * sum_{n>=0} z^(2n+1) / (2n+1)!!, for moderate |z|. */
function centralSeries(z: number): number {
  const z2 = z * z;
  let term = z;
  let sum = z;
  for (let n = 1; n < 200; n++) {
    term *= z2 / (2 * n + 1);
    sum += term;
    if (Math.abs(term) < 1e-17 * Math.abs(sum)) break;
  }
  return Math.exp(-0.5 * z2 - LOG_SQRT_2PI) * sum;
}

/** log of the standard normal CDF; -Infinity at -Infinity, 0 at +Infinity, NaN for NaN. */
export function logNormalCdf(z: number): number {
  if (z !== z) return NaN;
  if (z === -Infinity) return -Infinity;
  if (z === Infinity) return 0;
  if (z < -3) {
    const x = -z;
    return -0.5 * x * x - LOG_SQRT_2PI + Math.log(millsRatio(x));
  }
  if (z > 3) {
    const q = Math.exp(-0.5 * z * z - LOG_SQRT_2PI) * millsRatio(z);
    return Math.log1p(-q);
  }
  return Math.log(0.5 + centralSeries(z));
}
