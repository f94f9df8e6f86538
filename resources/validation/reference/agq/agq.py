"""Exact marginal maximum likelihood for nonlinear mixed-effects PK models with two log-normal
random effects, by adaptive Gauss-Hermite quadrature (AGQ: Pinheiro & Bates 1995, J Comput Graph
Stat 4:12-35; Pinheiro & Bates 2000 section 7.2). Shared by resources/validation/reference/phenobarb/exact_mle.py
and tests/reference/tdm-sparse/exact_mle.py.

Per subject i, p(y_i) = integral of p(y_i | phi) N(phi; m_i, Omega) dphi over its two individual
log parameters phi. The nodes are a tensor-product Gauss-Hermite grid centred at the conditional
mode of phi and scaled by the Cholesky factor of minus the inverse Hessian of the log joint
density there. Between re-centrings the grid is held fixed in phi while the population parameters
move (the quadrature rule stays exact in the limit; the grid is re-centred at the optimum found
and the optimisation repeated until the -2LL no longer changes, so the stored -2LL is plain AGQ
at the stored optimum). Censored levels contribute log Phi((LLOQ - f) / g). -2LL includes every
constant (2 pi terms).
"""
import csv
import json
import platform
import sys
import time

import numpy as np
import scipy
import scipy.optimize as so
from scipy.special import log_ndtr, logsumexp

LOG2PI = np.log(2.0 * np.pi)


def read_canonical_csv(path):
    """Subjects from Plateau's canonical CSV: doses (time, amount, duration), levels, covariates."""
    subj = {}
    order = []
    with open(path, newline='') as f:
        reader = csv.DictReader(f)
        base = {'subject', 'time_h', 'event', 'amount_mg', 'duration_h', 'conc_mg_L', 'censored', 'lloq_mg_L', 'route'}
        covs = [c for c in reader.fieldnames if c not in base]
        for row in reader:
            sid = row['subject']
            if sid not in subj:
                subj[sid] = {'id': sid, 'doses': [], 't': [], 'y': [], 'cens': [], 'lloq': [], 'cov': {c: float(row[c]) for c in covs}}
                order.append(sid)
            s = subj[sid]
            if row['event'] == 'dose':
                assert row['route'] == 'iv', 'only IV doses are handled here'
                dur = float(row['duration_h']) if row['duration_h'] else 0.0
                s['doses'].append((float(row['time_h']), float(row['amount_mg']), dur))
            else:
                s['t'].append(float(row['time_h']))
                c = row['censored'] == '1'
                s['cens'].append(c)
                s['y'].append(float(row['conc_mg_L']))
                s['lloq'].append(float(row['lloq_mg_L']) if row['lloq_mg_L'] else np.nan)
    out = []
    for sid in order:
        s = subj[sid]
        d = np.array(s['doses'], dtype=float).reshape(-1, 3)
        out.append({'id': sid, 'dose_t': d[:, 0], 'dose_amt': d[:, 1], 'dose_dur': d[:, 2], 't': np.array(s['t']), 'y': np.array(s['y']),
                    'cens': np.array(s['cens'], dtype=bool), 'lloq': np.array(s['lloq']), 'cov': s['cov']})
    return out


def gh_grid(n):
    """Tensor-product probabilists' Gauss-Hermite rule in 2 dimensions: nodes z and log weights
    for integrals against the standard normal density (weights sum to 1)."""
    x, w = np.polynomial.hermite_e.hermegauss(n)
    w = w / np.sqrt(2.0 * np.pi)
    Z = np.array(np.meshgrid(x, x, indexing='ij')).reshape(2, -1).T
    W = np.array(np.meshgrid(w, w, indexing='ij')).reshape(2, -1).T
    return Z, np.sum(np.log(W), axis=1)


class Problem:
    """A model: `predict(subject, phi (P, 2), extra) -> f (P, n)` for the subject's levels,
    `mean_phi(subject, theta) -> (2,)`, `extra(theta)` (structural parameters without BSV),
    `omega(theta) -> SDs (2,)`, `residual(theta) -> (a, b)` (b = 0 for additive error)."""

    def __init__(self, subjects, predict, mean_phi, extra, omega, residual, predictions_depend_on_theta):
        self.subjects = subjects
        self.predict = predict
        self.mean_phi = mean_phi
        self.extra = extra
        self.omega = omega
        self.residual = residual
        self.dep = predictions_depend_on_theta

    def loglik(self, s, f, a, b):
        """log p(y | f) per node row of f (P, n)."""
        g = np.sqrt(a * a + (b * f) ** 2)
        obs = ~s['cens']
        out = np.zeros(f.shape[0])
        if np.any(obs):
            r = (s['y'][obs][None, :] - f[:, obs]) / g[:, obs]
            out += np.sum(-0.5 * LOG2PI - np.log(g[:, obs]) - 0.5 * r * r, axis=1)
        if np.any(s['cens']):
            c = s['cens']
            out += np.sum(log_ndtr((s['lloq'][c][None, :] - f[:, c]) / g[:, c]), axis=1)
        return np.where(np.isfinite(out), out, -np.inf)

    def log_joint(self, s, theta, phi, f=None):
        if f is None:
            f = self.predict(s, phi, self.extra(theta))
        a, b = self.residual(theta)
        om = self.omega(theta)
        m = self.mean_phi(s, theta)
        z = (phi - m[None, :]) / om[None, :]
        lp = -LOG2PI - np.sum(np.log(om)) - 0.5 * np.sum(z * z, axis=1)
        return self.loglik(s, f, a, b) + lp

    def mode(self, s, theta, start):
        fun = lambda x: -self.log_joint(s, theta, x[None, :])[0]
        best = None
        for x0 in (start, self.mean_phi(s, theta)):
            r = so.minimize(fun, x0, method='Nelder-Mead', options={'xatol': 1e-9, 'fatol': 1e-11, 'maxiter': 4000})
            r = so.minimize(fun, r.x, method='BFGS', options={'gtol': 1e-9})
            if best is None or r.fun < best.fun:
                best = r
        x = best.x
        h = 1e-4
        H = np.zeros((2, 2))
        f0 = fun(x)
        for i in range(2):
            for j in range(2):
                e_i = np.eye(2)[i] * h
                e_j = np.eye(2)[j] * h
                H[i, j] = (fun(x + e_i + e_j) - fun(x + e_i - e_j) - fun(x - e_i + e_j) + fun(x - e_i - e_j)) / (4 * h * h)
        H = 0.5 * (H + H.T)
        cov = np.linalg.inv(H)
        return x, np.linalg.cholesky(cov)

    def centre(self, theta, nodes):
        """Fix each subject's grid at its conditional mode under theta."""
        Z, logw = gh_grid(nodes)
        self.grid = []
        for s in self.subjects:
            start = s.get('_mode', self.mean_phi(s, theta))
            m, L = self.mode(s, theta, start)
            s['_mode'] = m
            phi = m[None, :] + Z @ L.T
            # integral = E_z[p(m + L z) / phi_std(z)] |L|
            corr = np.log(np.abs(np.linalg.det(L))) + LOG2PI + 0.5 * np.sum(Z * Z, axis=1)
            f = None if self.dep else self.predict(s, phi, None)
            self.grid.append((phi, logw + corr, f))
        self.nodes = nodes

    def minus2ll(self, theta):
        total = 0.0
        for s, (phi, lw, f) in zip(self.subjects, self.grid):
            lj = self.log_joint(s, theta, phi, f)
            total += logsumexp(lw + lj)
        v = -2.0 * total
        return v if np.isfinite(v) else 1e12

    def fit(self, theta0, nodes, log, rounds=6):
        theta = np.array(theta0, dtype=float)
        prev = None
        for r in range(rounds):
            self.centre(theta, nodes)
            res = so.minimize(self.minus2ll, theta, method='Nelder-Mead', options={'xatol': 1e-7, 'fatol': 1e-8, 'maxiter': 20000, 'maxfev': 40000, 'adaptive': True})
            res = so.minimize(self.minus2ll, res.x, method='BFGS', options={'gtol': 1e-6})
            theta = res.x
            self.centre(theta, nodes)
            v = self.minus2ll(theta)
            log(f'  round {r + 1} ({nodes} nodes): -2LL {v:.6f} at {np.array2string(theta, precision=5)}')
            if prev is not None and abs(prev - v) < 1e-5:
                break
            prev = v
        return theta, v

    def hessian(self, theta, step):
        n = len(theta)
        H = np.zeros((n, n))
        f0 = self.minus2ll(theta)
        for i in range(n):
            for j in range(i, n):
                ei = np.zeros(n); ei[i] = step
                ej = np.zeros(n); ej[j] = step
                if i == j:
                    H[i, i] = (self.minus2ll(theta + ei) - 2 * f0 + self.minus2ll(theta - ei)) / (step * step)
                else:
                    H[i, j] = H[j, i] = (self.minus2ll(theta + ei + ej) - self.minus2ll(theta + ei - ej) - self.minus2ll(theta - ei + ej) + self.minus2ll(theta - ei - ej)) / (4 * step * step)
        return H


def versions():
    return {'python': platform.python_version(), 'numpy': np.__version__, 'scipy': scipy.__version__}


def logger():
    t0 = time.time()

    def log(msg):
        print(f'[{time.time() - t0:7.1f} s] {msg}', file=sys.stderr, flush=True)
    return log


def standard_errors(problem, theta, names, natural):
    """SEs from the numerical Hessian of the exact -2LL (covariance = 2 H^-1) in the optimiser
    parameters, with a step check, and on the reported scale by the delta method (natural(theta)
    returns (values dict, jacobian diagonal dict: d value / d theta_k))."""
    out = {}
    for step in (2e-3, 5e-3, 1e-3):
        H = problem.hessian(theta, step)
        cov = 2.0 * np.linalg.inv(H)
        out[step] = cov
    cov = out[2e-3]
    se_theta = np.sqrt(np.diag(cov))
    check = {f'{s:g}': float(np.max(np.abs(np.sqrt(np.diag(c)) / se_theta - 1))) for s, c in out.items() if s != 2e-3}
    vals, jac = natural(theta)
    se_nat = {k: float(abs(jac[k]) * se_theta[i]) for i, k in enumerate(names)}
    return {'optimiserScale': {n: float(se_theta[i]) for i, n in enumerate(names)}, 'reportedScale': se_nat,
            'maxRelativeChangeWithStep': check, 'covarianceOptimiserScale': cov.tolist()}
