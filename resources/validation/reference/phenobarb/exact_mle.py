#!/usr/bin/python3
"""Exact maximum-likelihood estimate for nlme's Phenobarb (Grasela & Donn 1985; shipped with R's
nlme, exported by export_phenobarb.R) under a one-compartment IV bolus model with repeated doses,
by adaptive Gauss-Hermite quadrature (resources/validation/reference/agq/agq.py). Writes exact_mle.json.

Model: C(t) = sum over doses before t of D / V exp(-CL/V (t - t_dose)) (a level at a dose time is
taken before that dose); log CL_i = log CL + theta_CL log(Wt / 1.3 kg) + eta_CL,
log V_i = log V + theta_V log(Wt / 1.3 kg) + eta_V, eta ~ N(0, diag(omega_CL^2, omega_V^2));
y = C + eps, eps ~ N(0, a^2) (additive error). 7 parameters: log CL, log V, theta_CL, theta_V,
log omega_CL, log omega_V, log a.

Run from the repository root:  /usr/bin/python3 resources/validation/reference/phenobarb/exact_mle.py
(a few minutes on a loaded 2-core machine).
"""
import json
import os
import sys

import numpy as np

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, os.path.join(HERE, '..', 'agq'))
import agq  # noqa: E402

REF_WT = 1.3
NAMES = ['CL_L_per_h', 'V_L', 'CL_weight_exponent', 'V_weight_exponent', 'omega_CL', 'omega_V', 'a_mg_L']


def predict(s, phi, _extra):
    cl = np.exp(phi[:, 0])[:, None, None]
    v = np.exp(phi[:, 1])[:, None, None]
    tau = s['t'][:, None] - s['dose_t'][None, :]
    on = tau > 0
    taup = np.where(on, tau, 0.0)[None, :, :]
    terms = np.where(on[None, :, :], s['dose_amt'][None, None, :] / v * np.exp(-cl / v * taup), 0.0)
    return terms.sum(axis=2)


def mean_phi(s, th):
    lw = np.log(s['cov']['weight_kg'] / REF_WT)
    return np.array([th[0] + th[2] * lw, th[1] + th[3] * lw])


def natural(th):
    vals = {'CL_L_per_h': np.exp(th[0]), 'V_L': np.exp(th[1]), 'CL_weight_exponent': th[2], 'V_weight_exponent': th[3],
            'omega_CL': np.exp(th[4]), 'omega_V': np.exp(th[5]), 'a_mg_L': np.exp(th[6])}
    jac = {'CL_L_per_h': vals['CL_L_per_h'], 'V_L': vals['V_L'], 'CL_weight_exponent': 1.0, 'V_weight_exponent': 1.0,
           'omega_CL': vals['omega_CL'], 'omega_V': vals['omega_V'], 'a_mg_L': vals['a_mg_L']}
    return {k: float(v) for k, v in vals.items()}, jac


def main():
    log = agq.logger()
    quick = '--quick' in sys.argv
    subjects = agq.read_canonical_csv(os.path.join(HERE, 'phenobarb.csv'))
    problem = agq.Problem(subjects, predict, mean_phi, lambda th: None, lambda th: np.exp(th[4:6]), lambda th: (np.exp(th[6]), 0.0), False)
    start = np.array([np.log(0.006), np.log(1.3), 1.0, 1.0, np.log(0.3), np.log(0.3), np.log(3.0)])
    nodes_main = 5 if quick else 15
    log(f'{len(subjects)} subjects, {sum(len(s["t"]) for s in subjects)} levels')
    theta, m2ll = problem.fit(start, nodes_main, log)
    conv = {}
    for n in ([3, 5] if quick else [1, 3, 5, 7, 11, 15, 21, 25]):
        problem.centre(theta, n)
        conv[str(n)] = float(problem.minus2ll(theta))
        log(f'  -2LL at the optimum with {n} nodes per dimension: {conv[str(n)]:.6f}')
    refits = {}
    for n in ([] if quick else [11, 21]):
        th_n, v_n = problem.fit(theta, n, log)
        refits[str(n)] = {'minus2LL': float(v_n), 'estimates': natural(th_n)[0]}
    problem.centre(theta, nodes_main)
    se = agq.standard_errors(problem, theta, NAMES, natural)
    vals, _ = natural(theta)
    out = {
        'script': 'resources/validation/reference/phenobarb/exact_mle.py',
        'source': 'Exact maximum likelihood by adaptive Gauss-Hermite quadrature (Pinheiro and Bates 1995, J Comput Graph Stat 4:12-35; Pinheiro and Bates 2000, section 7.2) on nlme::Phenobarb (Grasela and Donn 1985) exported to resources/validation/reference/phenobarb/phenobarb.csv by export_phenobarb.R',
        'generatedWith': agq.versions(),
        'notes': ('One-compartment IV bolus, repeated doses (superposition; a level at a dose time is before that dose). '
                  'log CL_i = log CL + CL_weight_exponent log(weight_kg / 1.3) + eta_CL; log V_i likewise with V_weight_exponent; '
                  'diagonal Omega, omega_* are SDs on the log scale; additive error a (mg/L). CL in L/h and V in L at 1.3 kg. '
                  f'minus2LL is the exact marginal -2LL with every constant, {nodes_main} Gauss-Hermite nodes per dimension centred at each subject\'s conditional mode '
                  'and scaled by the Cholesky factor of the inverse negative Hessian there. quadratureConvergence: -2LL at the optimum by node count; '
                  'refitWithNodes: the optimum re-found with other node counts. standardErrors: from the numerical Hessian of the exact -2LL '
                  '(covariance 2 H^-1) on the optimiser scale (log of CL, V, omegas, a; exponents as they are), reportedScale by the delta method.'),
        'model': {'structure': '1cmt', 'referenceWeightKg': REF_WT, 'residual': 'additive'},
        'estimates': vals,
        'minus2LL': float(m2ll),
        'nodesPerDimension': nodes_main,
        'quadratureConvergence': conv,
        'refitWithNodes': refits,
        'standardErrors': se,
        'optimiserParameters': theta.tolist(),
    }
    log(json.dumps({'estimates': vals, 'minus2LL': m2ll, 'se': se['reportedScale']}, indent=1))
    if not quick:
        with open(os.path.join(HERE, 'exact_mle.json'), 'w') as f:
            json.dump(out, f, indent=2)
            f.write('\n')


if __name__ == '__main__':
    main()
