/**
 * Residual error models and the per-observation likelihood, censored levels included
 * (DESIGN.md §4). Pure functions on numbers: no allocation, no exceptions; an impossible
 * value gives -Infinity so that a Metropolis-Hastings step simply rejects it.
 */
import type { ResidualModelId } from '../spec/modelSpec.js';
import { logNormalCdf } from './normalTail.js';

export type { ResidualModelId };

const LOG_SQRT_2PI = 0.5 * Math.log(2 * Math.PI);

/**
 * Residual SD for a prediction f (mg/L): additive a; proportional b |f|; combined
 * sqrt(a^2 + b^2 f^2); log-additive a (the SD of log y, on the log scale).
 */
export function residualSd(model: ResidualModelId, a: number, b: number, f: number): number {
  switch (model) {
    case 'additive':
      return a;
    case 'proportional':
      return b * Math.abs(f);
    case 'combined':
      return Math.sqrt(a * a + b * b * f * f);
    case 'log-additive':
      return a;
  }
}

/**
 * Log density of the level y (mg/L) given the prediction f, constants included. For
 * log-additive error the density is that of y on its own scale (the -log y Jacobian is
 * included) so that -2LL compares across error models. A censored level contributes
 * log P(Y < LLOQ) (log-additive: computed on the log scale). Returns -Infinity, never NaN,
 * for impossible values (non-finite f, f <= 0 or y <= 0 with log-additive error, SD <= 0).
 */
export function observationLogLik(
  model: ResidualModelId,
  a: number,
  b: number,
  y: number,
  f: number,
  censored: boolean,
  lloqMgL: number,
): number {
  if (!Number.isFinite(f)) return -Infinity;
  if (model === 'log-additive') {
    if (!(f > 0) || !(a > 0) || !Number.isFinite(a)) return -Infinity;
    const logF = Math.log(f);
    if (censored) {
      if (!(lloqMgL > 0)) return -Infinity;
      const r = logNormalCdf((Math.log(lloqMgL) - logF) / a);
      return r === r ? r : -Infinity;
    }
    if (!(y > 0)) return -Infinity;
    const logY = Math.log(y);
    const z = (logY - logF) / a;
    const r = -0.5 * z * z - Math.log(a) - LOG_SQRT_2PI - logY;
    return r === r ? r : -Infinity;
  }
  const g = residualSd(model, a, b, f);
  if (!(g > 0) || !Number.isFinite(g)) return -Infinity;
  if (censored) {
    const r = logNormalCdf((lloqMgL - f) / g);
    return r === r ? r : -Infinity;
  }
  const z = (y - f) / g;
  const r = -0.5 * z * z - Math.log(g) - LOG_SQRT_2PI;
  return r === r ? r : -Infinity;
}

/**
 * Combined error: one level's log-likelihood and its first and second derivatives with respect
 * to u = log a and v = log b, written into out = [l, dl/du, dl/dv, d2l/du2, d2l/dv2, d2l/dudv].
 * With w = g^2 = a^2 + b^2 f^2: dw/du = 2a^2, dw/dv = 2 b^2 f^2 (chain rule through w).
 * Returns false (out untouched) when the level is impossible.
 */
export function combinedErrorDerivatives(a: number, b: number, y: number, f: number, censored: boolean, lloqMgL: number, out: Float64Array): boolean {
  const A = a * a;
  const B = b * b * f * f;
  const w = A + B;
  if (!(w > 0) || !Number.isFinite(w)) return false;
  let l: number;
  let h1: number; // dl/dw
  let h2: number; // d2l/dw2
  if (censored) {
    const g = Math.sqrt(w);
    const z = (lloqMgL - f) / g;
    const logPhi = logNormalCdf(z);
    if (!Number.isFinite(logPhi)) return false;
    const lambda = Math.exp(-0.5 * z * z - LOG_SQRT_2PI - logPhi); // phi(z) / Phi(z)
    l = logPhi;
    h1 = (-lambda * z) / (2 * w);
    // d(lambda z)/dw = (lambda - lambda z (z + lambda)) dz/dw, dz/dw = -z / (2w)
    const dLambdaZ = (lambda - lambda * z * (z + lambda)) * (-z / (2 * w));
    h2 = -dLambdaZ / (2 * w) + (lambda * z) / (2 * w * w);
  } else {
    const r = y - f;
    l = (-0.5 * r * r) / w - 0.5 * Math.log(w) - LOG_SQRT_2PI;
    h1 = (r * r - w) / (2 * w * w);
    h2 = (w - 2 * r * r) / (2 * w * w * w);
  }
  out[0] = l;
  out[1] = h1 * 2 * A;
  out[2] = h1 * 2 * B;
  out[3] = h2 * 4 * A * A + h1 * 4 * A;
  out[4] = h2 * 4 * B * B + h1 * 4 * B;
  out[5] = h2 * 4 * A * B;
  return true;
}
