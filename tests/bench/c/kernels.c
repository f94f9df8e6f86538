/*
 * C reference for the structural-model bench (tests/bench/models.bench.ts): the arithmetic of
 * Plateau's specialised walks in engine/models/linear.ts, written out in C with the same
 * operations in the same order, on the same two histories and parameter vectors:
 *   oral: one-compartment, one oral dose of 500 mg at 0 h, levels at 0.5 ... 24 h
 *         (evaluateOralOne1: lazily filled table of transition factors per distinct interval)
 *   inf:  two-compartment, 60 one-hour infusions of 1000 mg every 8 h, 4 levels in the last
 *         interval (twoCompartmentModes + evaluateStatic2: the step program stepOp naming an
 *         interval length and an infusion rate per point, the factors of each distinct
 *         interval length computed once per evaluation)
 * Built by the bench with `cc -O2` (no -ffast-math, no -march: plain IEEE double arithmetic
 * as in JavaScript). Usage: kernels oral|inf SECONDS. Prints one JSON line: calls per
 * CPU-second and the levels of parameter vector 0, which the bench compares with the engine's.
 */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#define MAXP 512
#define EV_OUTPUT 1
#define EV_INF_START 3
#define EV_INF_STOP 4

static double cpu_ms(void) {
  struct timespec t;
  clock_gettime(CLOCK_PROCESS_CPUTIME_ID, &t);
  return t.tv_sec * 1e3 + t.tv_nsec / 1e6;
}

/* The prepared schedule (the fields of LinearWork the two walks read). */
static int ns, nu, last_output, infusion_length[MAXP], step_op[MAXP], unique_of[MAXP], kind[MAXP], out_index[MAXP], stamp[MAXP], eval_id;
static double time_h[MAXP], length_h[MAXP], rate_after[MAXP], value[MAXP];
static double tab_e[MAXP], tab_b[MAXP], tab_a[MAXP], tab_static[4 * MAXP];
static double oral_time_h, oral_amount_mg, step_rates[MAXP];
static int n_rates;

/* Distinct interval lengths in order of first occurrence (LinearWork's constructor). */
static void number_lengths(void) {
  nu = 0;
  for (int k = 0; k < ns; k++) {
    double dt = time_h[k] - (k > 0 ? time_h[k - 1] : 0);
    unique_of[k] = -1;
    if (!(dt > 0)) continue;
    int u = 0;
    while (u < nu && length_h[u] != dt) u++;
    if (u == nu) length_h[nu++] = dt;
    unique_of[k] = u;
  }
}

static int positive(double x) { return x > 0 && x < INFINITY; }

static int eval_oral1(const double *p, double *out) {
  double cl = p[0], v = p[1];
  if (!(positive(cl) && positive(v))) return 0;
  double l = cl / v, w0 = 1 / v;
  double ka = p[2], tlag = p[3], F = p[4];
  if (!(positive(ka) && tlag >= 0 && tlag < INFINITY && positive(F))) return 0;
  int id = ++eval_id;
  double te = oral_time_h + tlag;
  int k = 0;
  for (; k < ns && time_h[k] <= te; k++) {
    double c = 0 + w0 * 0;
    out[out_index[k]] = c < 0 ? 0 : c;
  }
  if (k == ns) return 1;
  double a = 0 + F * oral_amount_mg, s0;
  {
    double dt = time_h[k] - te;
    double ea = a != 0 ? exp(-ka * dt) : 0;
    double e = exp(-(l * dt));
    double z = e * 0;
    if (a != 0) {
      double d = (ka - l) * dt;
      double dd = d > 0.5 || d < -0.5 ? (e - ea) / (ka - l) : d >= 0 ? (d == 0 ? e * dt : (e * dt * -expm1(-d)) / d) : (ea * dt * -expm1(d)) / -d;
      z += ka * a * dd;
      a = a * ea;
    }
    s0 = z;
    double c = 0 + w0 * s0;
    out[out_index[k]] = c < 0 ? 0 : c;
  }
  for (k++; k < ns; k++) {
    int u = unique_of[k];
    if (u >= 0) {
      if (stamp[u] != id) {
        stamp[u] = id;
        double dt = length_h[u];
        double ea = exp(-ka * dt);
        tab_a[u] = ea;
        double e = exp(-(l * dt));
        tab_e[u] = e;
        double d = (ka - l) * dt;
        tab_b[u] = ka * (d > 0.5 || d < -0.5 ? (e - ea) / (ka - l) : d >= 0 ? (d == 0 ? e * dt : (e * dt * -expm1(-d)) / d) : (ea * dt * -expm1(d)) / -d);
      }
      if (a == 0) s0 *= tab_e[u];
      else {
        s0 = tab_e[u] * s0 + 0 + a * tab_b[u];
        a = a * tab_a[u];
      }
    }
    double c = 0 + w0 * s0;
    out[out_index[k]] = c < 0 ? 0 : c;
  }
  return 1;
}

static int eval_inf2(const double *p, double *out) {
  double cl = p[0], v1 = p[1], q = p[2], v2 = p[3];
  if (!(positive(cl) && positive(v1) && positive(q) && positive(v2))) return 0;
  double k10 = cl / v1, k12 = q / v1, k21 = q / v2;
  double uu = k10 + k12 - k21;
  double root = sqrt(uu * uu + 4 * k12 * k21);
  double alpha = 0.5 * (k10 + k12 + k21 + root);
  double beta = (k10 * k21) / alpha;
  double sep = alpha - beta;
  if (!(sep > 0)) return 0;
  double l0 = alpha, l1 = beta;
  double w0 = (alpha - k21) / sep / v1, w1 = (k21 - beta) / sep / v1;
  for (int u = 0; u < nu; u++) {
    double dt = length_h[u];
    int b = 4 * u;
    double x0 = l0 * dt, e0 = exp(-x0), x1 = l1 * dt, e1 = exp(-x1);
    tab_static[b] = e0;
    tab_static[b + 1] = e1;
    if (infusion_length[u]) {
      tab_static[b + 2] = (x0 < 0.5 ? -expm1(-x0) : 1 - e0) / l0;
      tab_static[b + 3] = (x1 < 0.5 ? -expm1(-x1) : 1 - e1) / l1;
    }
  }
  double s0 = 0, s1 = 0;
  for (int k = 0; k <= last_output; k++) {
    int op = step_op[k];
    int u1 = op >> 13;
    if (u1 != 0) {
      int b = 4 * u1 - 4;
      int ri = (op >> 2) & 2047;
      if (ri == 0) {
        s0 *= tab_static[b];
        s1 *= tab_static[b + 1];
      } else {
        double rate = step_rates[ri];
        s0 = tab_static[b] * s0 + rate * tab_static[b + 2];
        s1 = tab_static[b + 1] * s1 + rate * tab_static[b + 3];
      }
    }
    int ev = op & 3;
    if (ev == 1) {
      double c = 0 + w0 * s0 + w1 * s1;
      out[out_index[k]] = c < 0 ? 0 : c;
    } else if (ev == 2) {
      double v = value[k];
      s0 += v;
      s1 += v;
    }
  }
  return 1;
}

static void prepare_oral(void) {
  static const double t[10] = {0.5, 1, 1.5, 2, 3, 4, 6, 8, 12, 24};
  ns = 10;
  for (int k = 0; k < ns; k++) {
    time_h[k] = t[k];
    kind[k] = EV_OUTPUT;
    out_index[k] = k;
  }
  oral_time_h = 0;
  oral_amount_mg = 500;
  number_lengths();
}

/* Infusion starts and stops every 8 h and the 4 levels, sorted by time, levels before doses. */
static void prepare_inf(void) {
  int nd = 60;
  double end = 8.0 * nd, lv[4] = {end - 8.01, end - 7, end - 4, end - 0.01};
  int next = 0, iv = 0;
  double tk[MAXP];
  int kk[MAXP];
  for (int i = 0; i < nd; i++) {
    tk[next] = 8.0 * i, kk[next++] = EV_INF_START;
    tk[next] = 8.0 * i + 1, kk[next++] = EV_INF_STOP;
  }
  /* merge: the dose events are already in time order (stop of dose i before start of i+1) */
  ns = 0;
  int id = 0;
  while (id < next || iv < 4) {
    if (iv < 4 && (id >= next || lv[iv] <= tk[id])) {
      time_h[ns] = lv[iv], kind[ns] = EV_OUTPUT, out_index[ns] = iv, value[ns++] = iv++;
    } else {
      time_h[ns] = tk[id], kind[ns] = kk[id], out_index[ns] = -1, value[ns++] = 1000.0, id++;
    }
  }
  double rate = 0;
  int ninf = 0;
  for (int k = 0; k < ns; k++) {
    if (kind[k] == EV_INF_START) rate += value[k], ninf++;
    else if (kind[k] == EV_INF_STOP) ninf--, rate = ninf == 0 ? 0 : rate - value[k];
    rate_after[k] = rate;
    if (kind[k] == EV_OUTPUT) last_output = k;
  }
  number_lengths();
  int used = 0;
  for (int k = 0; k <= last_output; k++) if (unique_of[k] + 1 > used) used = unique_of[k] + 1;
  nu = used;
  for (int k = 1; k < ns; k++)
    if (unique_of[k] >= 0 && rate_after[k - 1] != 0) infusion_length[unique_of[k]] = 1;
  n_rates = 1;
  step_rates[0] = 0;
  for (int k = 0; k <= last_output; k++) {
    double r = k > 0 ? rate_after[k - 1] : 0;
    int ri = 0;
    if (r != 0) {
      while (ri < n_rates && step_rates[ri] != r) ri++;
      if (ri == n_rates) step_rates[n_rates++] = r;
    }
    int ev = kind[k] == EV_OUTPUT ? 1 : 0;
    step_op[k] = ((unique_of[k] + 1) << 13) | (ri << 2) | ev;
  }
}

int main(int argc, char **argv) {
  if (argc < 3) {
    fprintf(stderr, "usage: kernels oral|inf SECONDS\n");
    return 2;
  }
  int oral = strcmp(argv[1], "oral") == 0;
  double seconds = atof(argv[2]);
  double ps[4][7];
  static const double f[4] = {1, 1.1, 0.9, 1.05};
  for (int j = 0; j < 4; j++) {
    if (oral) {
      double q[5] = {4 * f[j], 50 * f[j], 1 * f[j], 0.25 * j, 0.8};
      memcpy(ps[j], q, sizeof q);
    } else {
      double q[7] = {4 * f[j], 20 * f[j], 5 * f[j], 40 * f[j], 1, 0, 1};
      memcpy(ps[j], q, sizeof q);
    }
  }
  if (oral) prepare_oral();
  else prepare_inf();
  int nout = oral ? 10 : 4;
  double out[10], first[10], sink = 0;
  if (oral) eval_oral1(ps[0], first);
  else eval_inf2(ps[0], first);
  long calls = 0, batch = 1000;
  double t0 = cpu_ms(), elapsed = 0;
  while (cpu_ms() - t0 < 150)
    for (int j = 0; j < 4; j++) oral ? eval_oral1(ps[j], out) : eval_inf2(ps[j], out);
  t0 = cpu_ms();
  while (elapsed < seconds * 1000) {
    for (long i = 0; i < batch; i++) {
      if (oral) eval_oral1(ps[i & 3], out);
      else eval_inf2(ps[i & 3], out);
      sink += out[0];
    }
    calls += batch;
    elapsed = cpu_ms() - t0;
    if (elapsed < 50) batch *= 2;
  }
  printf("{\"callsPerSecond\":%.6g,\"sink\":%.17g,\"levels\":[", calls / (elapsed / 1000), sink);
  for (int i = 0; i < nout; i++) printf("%s%.17g", i ? "," : "", first[i]);
  printf("]}\n");
  return 0;
}
