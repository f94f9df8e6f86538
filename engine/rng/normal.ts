/**
 * The standard normal distribution to full double precision: CDF, its log (usable far into the
 * lower tail, for censored likelihoods) and the quantile function.
 *   CDF: W. J. Cody, Rational Chebyshev approximations for the error function, Math. Comp. 1969;
 *        23:631-638 (coefficients of the CALERF packet, netlib specfun), via erfcx so that the
 *        exp(-x^2/2) factor is formed from x itself.
 *   Quantile: M. J. Wichura, Algorithm AS 241 (PPND16), Appl. Statist. 1988;37:477-484, then
 *        one Halley step on the CDF above.
 */

const SQRT1_2 = Math.SQRT1_2;
/** 1/sqrt(pi) */
const SQRT_PI_INV = 0.56418958354775628695;
/** 1/sqrt(2 pi) */
const SQRT_2PI_INV = 0.3989422804014326779399461;
/** log(sqrt(2 pi)) */
const LOG_SQRT_2PI = 0.9189385332046727417803297;
const SQRT_2PI = 2.5066282746310005024157652;

// Cody 1969: erf on |x| <= 0.46875.
const A0 = 3.1611237438705656, A1 = 113.864154151050156, A2 = 377.485237685302021, A3 = 3209.37758913846947, A4 = 0.185777706184603153;
const B0 = 23.6012909523441209, B1 = 244.024637934444173, B2 = 1282.61652607737228, B3 = 2844.23683343917062;
// erfcx on 0.46875 < x <= 4.
const C = [0.564188496988670089, 8.88314979438837594, 66.1191906371416295, 298.635138197400131, 881.95222124176909,
  1712.04761263407058, 2051.07837782607147, 1230.33935479799725, 2.15311535474403846e-8];
const D = [15.7449261107098347, 117.693950891312499, 537.181101862009858, 1621.38957456669019, 3290.79923573345963,
  4362.61909014324716, 3439.36767414372164, 1230.33935480374942];
// erfcx on x > 4.
const P = [0.305326634961232344, 0.360344899949804439, 0.125781726111229246, 0.0160837851487422766,
  6.58749161529837803e-4, 0.0163153871373020978];
const Q = [2.56852019228982242, 1.87295284992346047, 0.527905102951428412, 0.0605183413124413191, 0.00233520497626869185];

/** erf(y) for |y| <= 0.46875. */
function erfSmall(y: number): number {
  const ysq = y * y;
  let num = A4 * ysq;
  let den = ysq;
  num = (num + A0) * ysq;
  den = (den + B0) * ysq;
  num = (num + A1) * ysq;
  den = (den + B1) * ysq;
  num = (num + A2) * ysq;
  den = (den + B2) * ysq;
  return (y * (num + A3)) / (den + B3);
}

/** exp(y^2) erfc(y) for y > 0.46875 (Cody's second and third intervals). */
function erfcxLarge(y: number): number {
  if (y <= 4) {
    let num = C[8] * y;
    let den = y;
    for (let i = 0; i < 7; i++) {
      num = (num + C[i]) * y;
      den = (den + D[i]) * y;
    }
    return (num + C[7]) / (den + D[7]);
  }
  if (y >= 6.71e7) return SQRT_PI_INV / y;
  const ysq = 1 / (y * y);
  let num = P[5] * ysq;
  let den = ysq;
  for (let i = 0; i < 4; i++) {
    num = (num + P[i]) * ysq;
    den = (den + Q[i]) * ysq;
  }
  const r = (ysq * (num + P[4])) / (den + Q[4]);
  return (SQRT_PI_INV - r) / y;
}

/** exp(-x^2 / 2) with x^2 split so the rounding of x*x does not cost relative accuracy (Cody's trick). */
function expHalfSquare(x: number): number {
  const xs = Math.trunc(x * 16) / 16;
  const del = (x - xs) * (x + xs);
  return Math.exp(-0.5 * xs * xs) * Math.exp(-0.5 * del);
}

/** Lower tail Phi(x) for x <= -0.66291 (|x|/sqrt2 > 0.46875), relative accuracy ~1e-16. */
function lowerTail(x: number): number {
  return 0.5 * expHalfSquare(x) * erfcxLarge(-x * SQRT1_2);
}

/** Standard normal CDF, P(Z <= x). Accurate relative to the result in the lower tail; 0 below about -38.5. */
export function normalCdf(x: number): number {
  if (Number.isNaN(x)) return NaN;
  const y = Math.abs(x) * SQRT1_2;
  if (y <= 0.46875) return 0.5 + 0.5 * erfSmall(x * SQRT1_2);
  if (x < 0) return x === -Infinity ? 0 : lowerTail(x);
  return x === Infinity ? 1 : 1 - lowerTail(-x);
}

/** Upper tail P(Z > x) = normalCdf(-x), accurate for large x. */
export function normalSurvival(x: number): number {
  return normalCdf(-x);
}

/**
 * log P(Z <= x), finite for every finite x: far in the lower tail it is formed from
 * -x^2/2 + log(erfcx(-x/sqrt2)) without underflow; in the upper tail by log1p of the small tail.
 */
export function logNormalCdf(x: number): number {
  if (Number.isNaN(x)) return NaN;
  if (x === -Infinity) return -Infinity;
  if (x === Infinity) return 0;
  const y = Math.abs(x) * SQRT1_2;
  if (y <= 0.46875) return Math.log(0.5 + 0.5 * erfSmall(x * SQRT1_2));
  if (x < 0) {
    if (x > -30) return Math.log(lowerTail(x));
    // Beyond -30 the product would underflow below ~1e-198; work on the log scale.
    const xs = Math.trunc(x * 16) / 16;
    const del = (x - xs) * (x + xs);
    return -Math.LN2 - 0.5 * xs * xs - 0.5 * del + Math.log(erfcxLarge(-x * SQRT1_2));
  }
  return Math.log1p(-lowerTail(-x));
}

/** Standard normal density. */
export function normalPdf(x: number): number {
  return SQRT_2PI_INV * expHalfSquare(x);
}

/** log of the standard normal density. */
export function logNormalPdf(x: number): number {
  return -LOG_SQRT_2PI - 0.5 * x * x;
}

// Wichura AS 241 (PPND16) coefficients.
const QA = [3.387132872796366608, 133.14166789178437745, 1971.5909503065514427, 13731.693765509461125,
  45921.953931549871457, 67265.770927008700853, 33430.575583588128105, 2509.0809287301226727];
const QB = [1, 42.313330701600911252, 687.1870074920579083, 5394.1960214247511077, 21213.794301586595867,
  39307.89580009271061, 28729.085735721942674, 5226.495278852854561];
const QC = [1.42343711074968357734, 4.6303378461565452959, 5.7694972214606914055, 3.64784832476320460504,
  1.27045825245236838258, 0.24178072517745061177, 0.0227238449892691845833, 7.7454501427834140764e-4];
const QD = [1, 2.05319162663775882187, 1.6763848301838038494, 0.68976733498510000455, 0.14810397642748007459,
  0.0151986665636164571966, 5.475938084995344946e-4, 1.05075007164441684324e-9];
const QE = [6.6579046435011037772, 5.4637849111641143699, 1.7848265399172913358, 0.29656057182850489123,
  0.026532189526576123093, 0.0012426609473880784386, 2.71155556874348757815e-5, 2.01033439929228813265e-7];
const QF = [1, 0.59983220655588793769, 0.13692988092273580531, 0.0148753612908506148525, 7.868691311456132591e-4,
  1.8463183175100546818e-5, 1.4215117583164458887e-7, 2.04426310338993978564e-15];

function horner(c: readonly number[], x: number): number {
  let v = c[7];
  for (let i = 6; i >= 0; i--) v = v * x + c[i];
  return v;
}

/** AS 241 alone (about 1e-16 relative). */
function as241(p: number): number {
  const q = p - 0.5;
  if (Math.abs(q) <= 0.425) {
    const r = 0.180625 - q * q;
    return (q * horner(QA, r)) / horner(QB, r);
  }
  let r = q < 0 ? p : 1 - p;
  r = Math.sqrt(-Math.log(r));
  const v = r <= 5 ? horner(QC, r - 1.6) / horner(QD, r - 1.6) : horner(QE, r - 5) / horner(QF, r - 5);
  return q < 0 ? -v : v;
}

/**
 * Standard normal quantile: the x with P(Z <= x) = p. p = 0 gives -Infinity, p = 1 +Infinity,
 * outside [0, 1] or NaN gives NaN. For p near 1 precision is limited by p itself: use
 * `-normalQuantile(1 - p)` with an accurately known upper tail.
 */
export function normalQuantile(p: number): number {
  if (!(p >= 0 && p <= 1)) return NaN;
  if (p === 0) return -Infinity;
  if (p === 1) return Infinity;
  const x = as241(p);
  // One Halley step on Phi(x) - p, from the side whose tail is accurate.
  const e = x <= 0 ? normalCdf(x) - p : 1 - p - normalCdf(-x);
  const u = (e * SQRT_2PI) / expHalfSquare(x);
  if (!Number.isFinite(u)) return x;
  return x - u / (1 + 0.5 * x * u);
}
