/**
 * Adaptive embedded Runge-Kutta 5(4) of Dormand & Prince (J Comput Appl Math 1980;6:19-26),
 * FSAL, with the step-size control of Hairer, Norsett & Wanner, Solving Ordinary Differential
 * Equations I, 2nd ed., sect. II.4 (coefficients from that book's dopri5, from memory; checked
 * against scipy solve_ivp in resources/validation/reference/pk-ode). Allocation-free after creation.
 */

/** Index of the duration to integrate in Dopri5.work. */
export const DURATION = 0;
/** Index of the step-size guess in Dopri5.work. */
export const STEP = 1;

/**
 * The integrator; a model subclasses it with its right-hand side. One prototype method for
 * every instance keeps V8's optimised code shared and inlinable when many subjects each hold
 * their own integrator (closures per instance lose that).
 */
export abstract class Dopri5 {
  /** Doubles travel in here so that no call boxes a number: [DURATION] in, [STEP] in/out. */
  readonly work = new Float64Array(2);
  private readonly k1: Float64Array;
  private readonly k2: Float64Array;
  private readonly k3: Float64Array;
  private readonly k4: Float64Array;
  private readonly k5: Float64Array;
  private readonly k6: Float64Array;
  private readonly k7: Float64Array;
  private readonly yt: Float64Array;
  private readonly yn: Float64Array;

  constructor(
    readonly n: number,
    readonly relTol: number,
    readonly absTol: number,
  ) {
    this.k1 = new Float64Array(n);
    this.k2 = new Float64Array(n);
    this.k3 = new Float64Array(n);
    this.k4 = new Float64Array(n);
    this.k5 = new Float64Array(n);
    this.k6 = new Float64Array(n);
    this.k7 = new Float64Array(n);
    this.yt = new Float64Array(n);
    this.yn = new Float64Array(n);
  }

  /** dy/dt = f(y) (autonomous: time-varying inputs are piecewise constant between events). */
  abstract rhs(y: Float64Array, dy: Float64Array): void;

  /**
   * Integrate y in place over work[DURATION] hours (no discontinuity inside), starting with the
   * step-size guess work[STEP] (0 = choose one) and leaving the next guess there. Returns the
   * number of steps taken, or -1 when maxSteps ran out or the step size collapsed / went
   * non-finite.
   */
  integrate(y: Float64Array, maxSteps: number): number {
    const { work, n, relTol, absTol, k1, k2, k3, k4, k5, k6, k7, yt, yn } = this;
    const dt = work[DURATION];
    if (!(dt > 0)) return 0;
    // Tableau as locals: module-level constants are loaded from the context on every use.
    const A21 = 1 / 5;
    const A31 = 3 / 40, A32 = 9 / 40;
    const A41 = 44 / 45, A42 = -56 / 15, A43 = 32 / 9;
    const A51 = 19372 / 6561, A52 = -25360 / 2187, A53 = 64448 / 6561, A54 = -212 / 729;
    const A61 = 9017 / 3168, A62 = -355 / 33, A63 = 46732 / 5247, A64 = 49 / 176, A65 = -5103 / 18656;
    const A71 = 35 / 384, A73 = 500 / 1113, A74 = 125 / 192, A75 = -2187 / 6784, A76 = 11 / 84;
    const E1 = 71 / 57600, E3 = -71 / 16695, E4 = 71 / 1920, E5 = -17253 / 339200, E6 = 22 / 525, E7 = -1 / 40;
    let steps = 0;
    let done = 0;
    this.rhs(y, k1);
    let h = work[STEP];
    if (!(h > 0)) {
      // Initial guess: a step over which the solution changes by about the tolerance^(1/5) (Hairer II.4, simplified).
      let d0 = 0;
      let d1 = 0;
      for (let i = 0; i < n; i++) {
        const sc = absTol + relTol * Math.abs(y[i]);
        d0 += (y[i] / sc) * (y[i] / sc);
        d1 += (k1[i] / sc) * (k1[i] / sc);
      }
      d0 = Math.sqrt(d0 / n);
      d1 = Math.sqrt(d1 / n);
      h = d0 < 1e-5 || d1 < 1e-5 ? 1e-6 : 0.01 * (d0 / d1);
      h = Math.min(h, dt);
    }
    while (done < dt) {
      if (steps >= maxSteps) return -1;
      const hGuess = h;
      let last = false;
      if (done + h >= dt) {
        h = dt - done;
        last = true;
      }
      for (let i = 0; i < n; i++) yt[i] = y[i] + h * A21 * k1[i];
      this.rhs(yt, k2);
      for (let i = 0; i < n; i++) yt[i] = y[i] + h * (A31 * k1[i] + A32 * k2[i]);
      this.rhs(yt, k3);
      for (let i = 0; i < n; i++) yt[i] = y[i] + h * (A41 * k1[i] + A42 * k2[i] + A43 * k3[i]);
      this.rhs(yt, k4);
      for (let i = 0; i < n; i++) yt[i] = y[i] + h * (A51 * k1[i] + A52 * k2[i] + A53 * k3[i] + A54 * k4[i]);
      this.rhs(yt, k5);
      for (let i = 0; i < n; i++) yt[i] = y[i] + h * (A61 * k1[i] + A62 * k2[i] + A63 * k3[i] + A64 * k4[i] + A65 * k5[i]);
      this.rhs(yt, k6);
      for (let i = 0; i < n; i++) yn[i] = y[i] + h * (A71 * k1[i] + A73 * k3[i] + A74 * k4[i] + A75 * k5[i] + A76 * k6[i]);
      this.rhs(yn, k7);
      let err = 0;
      for (let i = 0; i < n; i++) {
        const e = h * (E1 * k1[i] + E3 * k3[i] + E4 * k4[i] + E5 * k5[i] + E6 * k6[i] + E7 * k7[i]);
        const ay = Math.abs(y[i]);
        const an = Math.abs(yn[i]);
        const sc = absTol + relTol * (ay > an ? ay : an);
        const r = e / sc;
        err += r * r;
      }
      err = Math.sqrt(err / n);
      steps++;
      if (!(err === err) || !(h > 0)) return -1;
      // Safety 0.9, growth between 0.2 and 5 per step (Hairer II.4).
      let fac = 5;
      if (err > 0) {
        fac = 0.9 * Math.exp(-0.2 * Math.log(err));
        if (fac > 5) fac = 5;
        else if (fac < 0.2) fac = 0.2;
      }
      if (err <= 1) {
        done = last ? dt : done + h;
        for (let i = 0; i < n; i++) {
          y[i] = yn[i];
          k1[i] = k7[i];
        }
        // A final step clamped to the interval end says nothing against the previous guess: keep it.
        h = last ? Math.max(h * fac, hGuess) : h * fac;
      } else {
        h *= Math.min(1, fac);
        if (h < 1e-14 * Math.max(1, dt)) return -1;
      }
    }
    work[STEP] = h;
    return steps;
  }
}

/** dy/dt = f(y) as a closure (for tests and one-off uses). */
export type Rhs = (y: Float64Array, dy: Float64Array) => void;

class ClosureOde extends Dopri5 {
  constructor(
    n: number,
    private readonly f: Rhs,
    relTol: number,
    absTol: number,
  ) {
    super(n, relTol, absTol);
  }
  rhs(y: Float64Array, dy: Float64Array): void {
    this.f(y, dy);
  }
}

/** An integrator over a closure right-hand side. */
export function createDopri5(n: number, f: Rhs, relTol: number, absTol: number): Dopri5 {
  return new ClosureOde(n, f, relTol, absTol);
}
