#!/usr/bin/python3
"""Reference concentrations for Plateau's structural models by general-purpose numerical ODE
integration: scipy.integrate.solve_ivp (DOP853, rtol 1e-12, atol 1e-14) on the compartment
equations written out as a matrix / right-hand side, independent of Plateau's closed forms.

Conventions mirrored from engine/models (catalogue.ts):
- a level at exactly a dose time is taken BEFORE the doses at that time;
- oral doses put F * amount into a depot at time + tlag; infusions are zero-order into central;
- a steady-state dose (ss_interval_h) is preceded by an explicit train of N_SS_INTERVALS
  doses every interval (this script simulates them one by one), and doses before it are
  dropped (a steady-state dose resets the state).

Run: /usr/bin/python3 resources/validation/reference/pk-ode/make_reference.py  (writes reference.json here)
"""
import json
import math
import os

import numpy as np
import scipy
from scipy.integrate import solve_ivp

RTOL = 1e-12
ATOL = 1e-14
METHOD = "DOP853"
N_SS_INTERVALS = 400


def linear_matrix(model, p):
    """Matrix K of dA/dt = K A for the disposition compartments (central first)."""
    if model == "1cmt":
        cl, v = p[:2]
        return np.array([[-cl / v]]), v
    if model == "2cmt":
        cl, v1, q, v2 = p[:4]
        return np.array([[-(cl + q) / v1, q / v2], [q / v1, -q / v2]]), v1
    if model == "3cmt":
        cl, v1, q2, v2, q3, v3 = p[:6]
        return (
            np.array(
                [
                    [-(cl + q2 + q3) / v1, q2 / v2, q3 / v3],
                    [q2 / v1, -q2 / v2, 0.0],
                    [q3 / v1, 0.0, -q3 / v3],
                ]
            ),
            v1,
        )
    raise ValueError(model)


def n_disposition(model):
    return {"1cmt": 2, "2cmt": 4, "3cmt": 6, "1cmt-mm": 3}[model]


def expand(doses):
    """Apply the steady-state convention: drop doses before the last SS dose, prepend its train."""
    ss = [i for i, d in enumerate(doses) if d.get("ss_interval_h")]
    if not ss:
        return [dict(d) for d in doses]
    last = doses[ss[-1]]
    t0 = last["time_h"]
    kept = [dict(d) for d in doses if d["time_h"] >= t0]
    for d in kept:
        d.pop("ss_interval_h", None)
    tau = last["ss_interval_h"]
    train = []
    for k in range(N_SS_INTERVALS, 0, -1):
        d = dict(last)
        d.pop("ss_interval_h", None)
        d["time_h"] = t0 - k * tau
        train.append(d)
    return train + kept


def simulate(model, params, doses, times):
    nd = n_disposition(model)
    ka, tlag, f = params[nd], params[nd + 1], params[nd + 2]
    if not any(d["route"] == "oral" for d in doses):
        ka, tlag, f = 0.0, 0.0, 1.0  # unused without oral doses (NaN in the case)
    if model == "1cmt-mm":
        vmax, km, vol = params[:3]
        ncmt = 1

        def rhs_factory(rate):
            def rhs(t, y):
                c = y[0] / vol
                return [ka * y[1] + rate - vmax * c / (km + c), -ka * y[1]]

            return rhs

    else:
        k_mat, vol = linear_matrix(model, params)
        ncmt = k_mat.shape[0]

        def rhs_factory(rate):
            def rhs(t, y):
                dy = np.zeros(ncmt + 1)
                dy[:ncmt] = k_mat @ y[:ncmt]
                dy[0] += ka * y[ncmt] + rate
                dy[ncmt] = -ka * y[ncmt]
                return dy

            return rhs

    events = []  # (time, kind, value): kind bolus | depot | rate
    for d in expand(doses):
        if d["route"] == "bolus":
            events.append((d["time_h"], "bolus", d["amount_mg"]))
        elif d["route"] == "infusion":
            r = d["amount_mg"] / d["duration_h"]
            events.append((d["time_h"], "rate", r))
            events.append((d["time_h"] + d["duration_h"], "rate", -r))
        else:
            events.append((d["time_h"] + tlag, "depot", f * d["amount_mg"]))
    t_start = min([0.0] + [e[0] for e in events])
    points = sorted(set([e[0] for e in events] + list(times)))
    y = np.zeros(ncmt + 1)
    rate = 0.0
    tc = t_start
    conc_at = {}
    for tp in points:
        if tp > tc:
            if np.any(y != 0) or rate != 0:
                sol = solve_ivp(rhs_factory(rate), (tc, tp), y, method=METHOD, rtol=RTOL, atol=ATOL)
                assert sol.success, sol.message
                y = sol.y[:, -1].copy()
            tc = tp
        conc_at[tp] = y[0] / vol  # before the events at tp
        for te, kind, v in events:
            if te == tp:
                if kind == "bolus":
                    y[0] += v
                elif kind == "depot":
                    y[ncmt] += v
                else:
                    rate += v
        if abs(rate) < 1e-9:
            rate = 0.0
    return [conc_at[t] for t in times]


def bolus(t, a, ss=None):
    return {"time_h": t, "amount_mg": a, "route": "bolus", "duration_h": 0, **({"ss_interval_h": ss} if ss else {})}


def inf(t, a, dur, ss=None):
    return {"time_h": t, "amount_mg": a, "route": "infusion", "duration_h": dur, **({"ss_interval_h": ss} if ss else {})}


def oral(t, a, ss=None):
    return {"time_h": t, "amount_mg": a, "route": "oral", "duration_h": 0, **({"ss_interval_h": ss} if ss else {})}


def _alpha_2cmt(cl, v1, q, v2):
    k10, k12, k21 = cl / v1, q / v1, q / v2
    s = k10 + k12 + k21
    return (s + math.sqrt(s * s - 4 * k10 * k21)) / 2


ALPHA_2CMT = _alpha_2cmt(3, 15, 6, 40)

MIXED_DOSES = [
    bolus(0, 500),
    inf(8, 1000, 2),
    inf(9, 600, 6),  # overlaps the previous infusion
    oral(20, 400),
    oral(32, 400),
    bolus(32, 200),
    inf(40, 300, 0.5),
]
MIXED_TIMES = [0, 0.25, 1, 4, 8, 9, 9.5, 10, 12, 15, 20, 20.3, 20.6, 21, 24, 32, 32.5, 36, 40, 40.25, 40.5, 48, 72]

CASES = [
    {"name": "2cmt mixed bolus, overlapping infusions, oral with lag and F", "model": "2cmt",
     "params": [3, 15, 6, 40, 0.9, 0.6, 0.75], "doses": MIXED_DOSES, "times": MIXED_TIMES},
    {"name": "3cmt mixed bolus, overlapping infusions, oral with lag and F", "model": "3cmt",
     "params": [5, 10, 12, 25, 1.5, 80, 1.7, 0.25, 0.9], "doses": MIXED_DOSES, "times": MIXED_TIMES},
    {"name": "3cmt mixed, fast distribution and slow terminal phase", "model": "3cmt",
     "params": [2, 5, 30, 10, 0.3, 150, 4, 0, 1], "doses": MIXED_DOSES, "times": MIXED_TIMES},
    {"name": "2cmt steady-state infusion q12h then two more doses", "model": "2cmt",
     "params": [4, 20, 5, 40, float("nan"), float("nan"), float("nan")],
     "doses": [inf(0, 1000, 1, 12), inf(12, 1000, 1), inf(24, 1000, 1)],
     "times": [0, 0.5, 1, 2, 6, 11.99, 12, 13, 24, 30, 48]},
    {"name": "3cmt steady-state oral q8h with lag after an earlier bolus (reset)", "model": "3cmt",
     "params": [5, 10, 12, 25, 1.5, 80, 1.1, 0.5, 0.8],
     "doses": [bolus(0, 400), oral(10, 300, 8), oral(18, 300)],
     "times": [10, 10.25, 10.5, 11, 14, 18, 18.5, 20, 30]},
    {"name": "2cmt steady-state bolus q6h after an infusion (reset)", "model": "2cmt",
     "params": [6, 12, 3, 30, float("nan"), float("nan"), float("nan")],
     "doses": [inf(0, 500, 4), bolus(24, 250, 6)],
     "times": [24, 24.5, 26, 30, 40]},
    {"name": "1cmt steady-state oral q2h with lag longer than the interval", "model": "1cmt",
     "params": [4, 50, 0.8, 3.0, 0.9],
     "doses": [oral(5, 100, 2)],
     "times": [5, 5.5, 6, 7, 8, 9, 12, 20]},
    {"name": "2cmt steady-state oral q4h with lag equal to the interval", "model": "2cmt",
     "params": [3, 15, 6, 40, 0.9, 4.0, 0.75],
     "doses": [oral(10, 200, 4), oral(14, 200)],
     "times": [10, 11, 13.9, 14, 15, 18, 20, 30]},
    {"name": "1cmt oral with ka equal to CL/V", "model": "1cmt",
     "params": [4, 50, 0.08, 0.0, 1.0],
     "doses": [oral(0, 500), oral(12, 500)],
     "times": [0.5, 2, 6, 12, 13, 24, 48, 96]},
    {"name": "2cmt oral with ka equal to the fast rate alpha", "model": "2cmt",
     "params": [3, 15, 6, 40, ALPHA_2CMT, 0.2, 0.8],
     "doses": [oral(0, 400), oral(8, 400, None)],
     "times": [0.1, 0.5, 1, 3, 8, 9, 16, 30]},
    {"name": "1cmt-mm bolus and overlapping infusions", "model": "1cmt-mm",
     "params": [30, 5, 40, float("nan"), float("nan"), float("nan")],
     "doses": [bolus(0, 300), inf(6, 400, 4), inf(8, 200, 1)],
     "times": [0, 0.5, 2, 6, 7, 8, 8.5, 9, 10, 12, 24, 48]},
    {"name": "1cmt-mm oral with lag and F, repeated", "model": "1cmt-mm",
     "params": [20, 4, 50, 1.2, 0.5, 0.9],
     "doses": [oral(0, 300), oral(12, 300), oral(24, 300)],
     "times": [0.25, 0.5, 1, 2, 4, 12, 13, 24, 25, 36, 60]},
    {"name": "1cmt-mm steady-state oral q12h", "model": "1cmt-mm",
     "params": [20, 4, 50, 1.2, 0.5, 0.9],
     "doses": [oral(0, 150, 12), oral(12, 150)],
     "times": [0, 0.5, 1, 3, 6, 12, 13, 24]},
    {"name": "1cmt-mm steady-state bolus q12h near saturation (input 80 % of Vmax)", "model": "1cmt-mm",
     "params": [20, 4, 50, float("nan"), float("nan"), float("nan")],
     "doses": [bolus(0, 192, 12)],
     "times": [0, 1, 6, 12]},
    {"name": "1cmt-mm steady-state infusion q8h", "model": "1cmt-mm",
     "params": [40, 6, 40, float("nan"), float("nan"), float("nan")],
     "doses": [inf(0, 200, 1, 8)],
     "times": [0, 0.5, 1, 4, 8]},
]


def main():
    out_cases = []
    for c in CASES:
        conc = simulate(c["model"], c["params"], c["doses"], c["times"])
        out_cases.append({**c, "params": [None if (isinstance(x, float) and math.isnan(x)) else x for x in c["params"]],
                          "concMgL": conc})
    doc = {
        "source": "scipy solve_ivp",
        "script": "resources/validation/reference/pk-ode/make_reference.py",
        "scipyVersion": scipy.__version__,
        "method": METHOD,
        "rtol": RTOL,
        "atol": ATOL,
        "steadyStateTrainIntervals": N_SS_INTERVALS,
        "note": "params in the model's parameterOrder (null = not used); times h, doses mg, concentrations mg/L; a level at a dose time is before the dose",
        "cases": out_cases,
    }
    here = os.path.dirname(os.path.abspath(__file__))
    with open(os.path.join(here, "reference.json"), "w") as fh:
        json.dump(doc, fh, indent=1)
        fh.write("\n")


if __name__ == "__main__":
    main()
