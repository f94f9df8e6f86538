/**
 * Normal-tail helpers for the censored likelihood and the imputation of censored levels.
 * log Phi comes from engine/rng; the truncated draw works on the log scale so that levels far
 * below the LLOQ (tiny tail mass) are still drawn accurately.
 */
import { logNormalCdf, normalQuantile } from '../rng/index.js';

export { logNormalCdf };

/**
 * The z with log Phi(z) = logP (logP <= 0). Starts from the quantile of exp(logP) (or the
 * asymptotic tail form when it underflows) and polishes with Newton steps on log Phi.
 */
export function normalQuantileFromLog(logP: number): number {
  if (!(logP <= 0)) return NaN;
  if (logP === 0) return Infinity;
  if (logP === -Infinity) return -Infinity;
  let z: number;
  if (logP > -Math.LN2) {
    // Upper half: Phi(z) = 1 - q with q = -expm1(logP) accurate.
    return -normalQuantile(-Math.expm1(logP));
  }
  if (logP > -700) z = normalQuantile(Math.exp(logP));
  else {
    const t = -2 * logP;
    z = -Math.sqrt(t - Math.log(t) - Math.log(2 * Math.PI));
  }
  if (logP > -600) return z;
  for (let it = 0; it < 6; it++) {
    // d/dz log Phi(z) = phi(z)/Phi(z) = exp(logPdf - logCdf)
    const lc = logNormalCdf(z);
    const slope = Math.exp(-0.5 * z * z - 0.5 * Math.log(2 * Math.PI) - lc);
    const step = (lc - logP) / slope;
    z -= step;
    if (Math.abs(step) < 1e-14 * Math.abs(z)) break;
  }
  return z;
}

/**
 * Draw from N(0,1) truncated to (-inf, upper] given one uniform u in (0,1):
 * Phi^-1(u Phi(upper)) (Samson, Lavielle & Mentre 2006, from memory), on the log scale.
 */
export function truncatedNormalBelow(upper: number, u: number): number {
  const z = normalQuantileFromLog(Math.log(u) + logNormalCdf(upper));
  return z > upper ? upper : z;
}
