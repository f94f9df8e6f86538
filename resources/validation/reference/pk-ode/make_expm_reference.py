#!/usr/bin/python3
"""High-precision reference concentrations for the linear models by the matrix exponential in
mpmath (50 significant digits, mpmath.expm), for stiff and near-degenerate parameter sets where
an ODE solver's tolerance would limit the check. Single bolus, oral (depot as an extra
compartment, with lag and F) and infusion (the rate as a constant extra state) doses.

Run: /usr/bin/python3 resources/validation/reference/pk-ode/make_expm_reference.py  (writes expm_reference.json here)
"""
import json
import os

import mpmath as mp

mp.mp.dps = 50


def disposition(model, p):
    p = [mp.mpf(x) for x in p]
    if model == "1cmt":
        cl, v = p[:2]
        return mp.matrix([[-cl / v]]), v
    if model == "2cmt":
        cl, v1, q, v2 = p[:4]
        return mp.matrix([[-(cl + q) / v1, q / v2], [q / v1, -q / v2]]), v1
    cl, v1, q2, v2, q3, v3 = p[:6]
    return mp.matrix([[-(cl + q2 + q3) / v1, q2 / v2, q3 / v3], [q2 / v1, -q2 / v2, 0], [q3 / v1, 0, -q3 / v3]]), v1


def conc(model, p, dose, t):
    """Central concentration at t after one dose at time 0 (levels at t <= start are 0 / pre-dose)."""
    nd = {"1cmt": 2, "2cmt": 4, "3cmt": 6}[model]
    k, v = disposition(model, p)
    n = k.rows
    # Augmented state: compartments, depot, infusion rate (constant while it runs).
    a = mp.zeros(n + 2, n + 2)
    for i in range(n):
        for j in range(n):
            a[i, j] = k[i, j]
    t = mp.mpf(t)
    x0 = mp.zeros(n + 2, 1)
    if dose["route"] == "bolus":
        x0[0] = dose["amount_mg"]
        x = mp.expm(a * t) * x0 if t > 0 else mp.zeros(n + 2, 1)
    elif dose["route"] == "oral":
        ka, tlag, f = [mp.mpf(x) for x in p[nd:nd + 3]]
        a[0, n] = ka
        a[n, n] = -ka
        x0[n] = f * dose["amount_mg"]
        x = mp.expm(a * (t - tlag)) * x0 if t > tlag else mp.zeros(n + 2, 1)
    else:
        dur = mp.mpf(dose["duration_h"])
        a[0, n + 1] = 1
        x0[n + 1] = mp.mpf(dose["amount_mg"]) / dur
        if t <= 0:
            x = mp.zeros(n + 2, 1)
        elif t <= dur:
            x = mp.expm(a * t) * x0
        else:
            x = mp.expm(a * dur) * x0
            x[n + 1] = 0
            x = mp.expm(a * (t - dur)) * x
    return float(x[0] / v)


TIMES = [0.01, 0.3, 1, 5, 24, 100, 1000]
CASES = [
    {"name": "3cmt stiff: fast distribution, very slow deep compartment", "model": "3cmt", "params": [0.1, 1, 100, 1, 0.001, 1000, 2, 0.2, 0.7]},
    {"name": "3cmt stiff: very fast second peripheral", "model": "3cmt", "params": [50, 5, 0.01, 100, 200, 2, 0.5, 0, 1]},
    {"name": "3cmt near-degenerate rates", "model": "3cmt", "params": [2, 50, 0.001, 0.01, 5, 5.1, 1.3, 0.1, 0.9]},
    {"name": "2cmt near-equal rates", "model": "2cmt", "params": [4, 50, 1e-6, 1e-4, 0.08, 0, 1]},
    {"name": "2cmt very slow absorption (flip-flop)", "model": "2cmt", "params": [10, 10, 5, 50, 0.005, 1.5, 0.6]},
    {"name": "1cmt fast elimination, long horizon", "model": "1cmt", "params": [200, 10, 3, 0.25, 0.5]},
]
DOSES = [
    {"time_h": 0, "amount_mg": 1000, "route": "bolus", "duration_h": 0},
    {"time_h": 0, "amount_mg": 500, "route": "oral", "duration_h": 0},
    {"time_h": 0, "amount_mg": 700, "route": "infusion", "duration_h": 2},
]


def main():
    cases = []
    for c in CASES:
        for d in DOSES:
            cases.append({**c, "name": f"{c['name']}, {d['route']}", "doses": [d], "times": TIMES,
                          "concMgL": [conc(c["model"], c["params"], d, t) for t in TIMES]})
    doc = {
        "source": "mpmath expm (50 digits)",
        "script": "resources/validation/reference/pk-ode/make_expm_reference.py",
        "mpmathVersion": mp.__version__,
        "digits": mp.mp.dps,
        "note": "single doses at time 0; params in the model's parameterOrder; times h, doses mg, concentrations mg/L",
        "cases": cases,
    }
    here = os.path.dirname(os.path.abspath(__file__))
    with open(os.path.join(here, "expm_reference.json"), "w") as fh:
        json.dump(doc, fh, indent=1)
        fh.write("\n")


if __name__ == "__main__":
    main()
