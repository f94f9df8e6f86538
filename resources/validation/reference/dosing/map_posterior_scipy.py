#!/usr/bin/python3
"""Reference values for the dosing engine (tests/unit/dosing/reference.test.ts).

Independent implementation, in Python with numpy/scipy, of one patient's posterior under a
one-compartment model with zero-order infusions (closed form by superposition of every dose;
Gibaldi & Perrier, Pharmacokinetics 2nd ed. 1982, from memory) and log-normal parameters:
  objective(eta) = sum_j -2 log p(y_j | eta) + eta' Omega^-1 eta
with p the normal density of the residual model (additive, proportional, combined), constants
included, and log Phi((LLOQ - f) / g) for a level below the LLOQ.
1. MAP: scipy.optimize.minimize (Nelder-Mead, then BFGS from its optimum) on a few patients;
   also for a two-compartment model solved by the matrix exponential of the linear ODE system
   (scipy.linalg.expm, an independent method), BSV on CL and V1 only.
2. Posterior of CL and V for one patient by exact numerical integration on a fine grid:
   posterior means and 5 % / 95 % quantiles of the marginals, with the marginal density at each
   quantile (for the Monte Carlo error of a sampled quantile).
The patients are invented for this check. Run: /usr/bin/python3 map_posterior_scipy.py
(writes map_posterior_scipy.json next to this script).
"""
import json
import math
import os

import numpy as np
import scipy
from scipy.linalg import expm
from scipy.optimize import minimize
from scipy.stats import norm

trapz = getattr(np, "trapezoid", None) or np.trapz

HERE = os.path.dirname(os.path.abspath(__file__))

MODEL_A = {
    "name": "reference check model (invented values)",
    "source": "invented for the reference check",
    "structure": "1cmt",
    "parameters": {"CL": {"typical": 3.5, "transform": "log", "bsv": 0.35}, "V": {"typical": 50, "transform": "log", "bsv": 0.25}},
    "covariates": [
        {"parameter": "CL", "covariate": "crcl_mL_min", "relation": "power", "reference": 80, "coefficient": 0.75, "fixed": True},
        {"parameter": "V", "covariate": "weight_kg", "relation": "power", "reference": 70, "coefficient": 1.0, "fixed": True},
    ],
    "correlations": [],
    "residual": {"model": "combined", "a": 1.0, "b": 0.15},
}
MODEL_B = dict(MODEL_A, residual={"model": "proportional", "b": 0.2}, correlations=[["CL", "V"]], correlationValues={"CL,V": 0.4})
MODEL_C = dict(MODEL_A, residual={"model": "additive", "a": 1.5})

PATIENTS = [
    {
        "model": MODEL_A,
        "patient": {
            "id": "ref-A",
            "covariates": {"crcl_mL_min": 60, "weight_kg": 90},
            "doses": [{"time_h": t, "amount_mg": 1000, "duration_h": 1, "route": "iv"} for t in (0, 12, 24)],
            "levels": [{"time_h": 23.5, "conc_mg_L": 14.0}, {"time_h": 26.0, "conc_mg_L": 33.0}],
        },
    },
    {
        "model": MODEL_B,
        "patient": {
            "id": "ref-B",
            "covariates": {"crcl_mL_min": 110, "weight_kg": 65},
            "doses": [{"time_h": 0, "amount_mg": 1500, "duration_h": 1.5, "route": "iv"}, {"time_h": 12, "amount_mg": 1250, "duration_h": 1.5, "route": "iv"}],
            "levels": [{"time_h": 11.75, "conc_mg_L": 6.1}],
        },
    },
    {
        "model": MODEL_C,
        "patient": {
            "id": "ref-C",
            "covariates": {"crcl_mL_min": 35, "weight_kg": 75},
            "doses": [{"time_h": 0, "amount_mg": 750, "duration_h": 1, "route": "iv"}, {"time_h": 24, "amount_mg": 750, "duration_h": 1, "route": "iv"}],
            "levels": [
                {"time_h": 2.0, "conc_mg_L": 17.5},
                {"time_h": 23.9, "conc_mg_L": 9.0},
                {"time_h": 70.0, "censored": True, "lloq_mg_L": 2.0},
            ],
        },
    },
]


MODEL_2CMT = {
    "name": "reference check two-compartment model (invented values)",
    "source": "invented for the reference check",
    "structure": "2cmt",
    "parameters": {
        "CL": {"typical": 5.0, "transform": "log", "bsv": 0.3},
        "V1": {"typical": 18.0, "transform": "log", "bsv": 0.2},
        "Q": {"typical": 1.5, "transform": "log", "bsv": None},
        "V2": {"typical": 10.0, "transform": "log", "bsv": None},
    },
    "covariates": [{"parameter": "V1", "covariate": "weight_kg", "relation": "power", "reference": 70, "coefficient": 1.0, "fixed": True}],
    "correlations": [],
    "residual": {"model": "combined", "a": 0.1, "b": 0.1},
}
PATIENTS_2CMT = [
    {
        "model": MODEL_2CMT,
        "patient": {
            "id": "ref-2cmt",
            "covariates": {"weight_kg": 80},
            "doses": [{"time_h": 0, "amount_mg": 400, "duration_h": 0.5, "route": "iv"}, {"time_h": 24, "amount_mg": 400, "duration_h": 0.5, "route": "iv"}],
            "levels": [{"time_h": 1.0, "conc_mg_L": 16.0}, {"time_h": 8.0, "conc_mg_L": 3.1}, {"time_h": 25.0, "conc_mg_L": 17.5}],
        },
    }
]


def conc_2cmt(p, doses, t):
    """Central concentration by exact propagation of the augmented linear system over events."""
    cl, v1, q, v2 = p["CL"], p["V1"], p["Q"], p["V2"]
    K = np.array([[-(cl + q) / v1, q / v2], [q / v1, -q / v2]])
    events = sorted({0.0, t} | {d["time_h"] for d in doses} | {d["time_h"] + d["duration_h"] for d in doses})
    x = np.zeros(2)
    tc = 0.0
    for e in events:
        if e > t:
            break
        if e > tc:
            rate = sum(d["amount_mg"] / d["duration_h"] for d in doses if d["duration_h"] > 0 and d["time_h"] <= tc < d["time_h"] + d["duration_h"])
            M = np.zeros((3, 3))
            M[:2, :2] = K
            M[0, 2] = rate
            y = expm(M * (e - tc)) @ np.array([x[0], x[1], 1.0])
            x = y[:2]
            tc = e
        if e < t:
            x[0] += sum(d["amount_mg"] for d in doses if d["duration_h"] == 0 and d["time_h"] == e)
    return x[0] / v1


def objective_2cmt(case):
    m, pat = case["model"], case["patient"]
    phi = {n: math.log(q["typical"]) for n, q in m["parameters"].items()}
    for c in m["covariates"]:
        phi[c["parameter"]] += c["coefficient"] * math.log(pat["covariates"][c["covariate"]] / c["reference"])
    omega_inv = np.diag([1 / 0.3**2, 1 / 0.2**2])
    a, b = m["residual"]["a"], m["residual"]["b"]

    def obj(eta):
        p = {n: math.exp(phi[n]) for n in phi}
        p["CL"] = math.exp(phi["CL"] + eta[0])
        p["V1"] = math.exp(phi["V1"] + eta[1])
        s = 0.0
        for lv in pat["levels"]:
            f = conc_2cmt(p, pat["doses"], lv["time_h"])
            g = math.sqrt(a * a + b * b * f * f)
            z = (lv["conc_mg_L"] - f) / g
            s += z * z + 2 * math.log(g) + math.log(2 * math.pi)
        e = np.asarray(eta)
        return s + float(e @ omega_inv @ e)

    return obj, phi


def map_2cmt(case):
    obj, phi = objective_2cmt(case)
    nm = minimize(obj, [0.0, 0.0], method="Nelder-Mead", options={"xatol": 1e-12, "fatol": 1e-14, "maxiter": 20000})
    bf = minimize(obj, nm.x, method="BFGS", options={"gtol": 1e-10})
    x = bf.x if bf.fun <= nm.fun else nm.x
    return {"etaCL": x[0], "etaV1": x[1], "CL": math.exp(phi["CL"] + x[0]), "V1": math.exp(phi["V1"] + x[1]), "objective": obj(x)}


def conc(cl, v, doses, t):
    k = cl / v
    c = 0.0
    for d in doses:
        s, amt, dur = d["time_h"], d["amount_mg"], d["duration_h"]
        if t <= s:
            continue  # a level at a dose time is taken before the dose
        if dur > 0:
            rate = amt / dur
            if t <= s + dur:
                c += rate / cl * (1 - math.exp(-k * (t - s)))
            else:
                c += rate / cl * (1 - math.exp(-k * dur)) * math.exp(-k * (t - s - dur))
        else:
            c += amt / v * math.exp(-k * (t - s))
    return c


def setup(case):
    m, p = case["model"], case["patient"]
    phi = {n: math.log(q["typical"]) for n, q in m["parameters"].items()}
    for c in m["covariates"]:
        phi[c["parameter"]] += c["coefficient"] * math.log(p["covariates"][c["covariate"]] / c["reference"])
    sd = np.array([m["parameters"]["CL"]["bsv"], m["parameters"]["V"]["bsv"]])
    r = m.get("correlationValues", {}).get("CL,V", 0.0)
    omega = np.array([[sd[0] ** 2, r * sd[0] * sd[1]], [r * sd[0] * sd[1], sd[1] ** 2]])
    return m, p, phi, np.linalg.inv(omega)


def objective_factory(case):
    m, p, phi, omega_inv = setup(case)
    res = m["residual"]
    a, b = res.get("a", 0.0), res.get("b", 0.0)

    def g_of(f):
        if res["model"] == "additive":
            return a
        if res["model"] == "proportional":
            return b * abs(f)
        return math.sqrt(a * a + b * b * f * f)

    def obj(eta):
        cl = math.exp(phi["CL"] + eta[0])
        v = math.exp(phi["V"] + eta[1])
        s = 0.0
        for lv in p["levels"]:
            f = conc(cl, v, p["doses"], lv["time_h"])
            g = g_of(f)
            if not g > 0:
                return math.inf
            if lv.get("censored"):
                s += -2 * norm.logcdf((lv["lloq_mg_L"] - f) / g)
            else:
                z = (lv["conc_mg_L"] - f) / g
                s += z * z + 2 * math.log(g) + math.log(2 * math.pi)
        e = np.asarray(eta)
        return s + float(e @ omega_inv @ e)

    return obj, phi


def map_of(case):
    obj, phi = objective_factory(case)
    nm = minimize(obj, [0.0, 0.0], method="Nelder-Mead", options={"xatol": 1e-12, "fatol": 1e-14, "maxiter": 20000})
    bf = minimize(obj, nm.x, method="BFGS", options={"gtol": 1e-10})
    x = bf.x if bf.fun <= nm.fun else nm.x
    return {"etaCL": x[0], "etaV": x[1], "CL": math.exp(phi["CL"] + x[0]), "V": math.exp(phi["V"] + x[1]), "objective": obj(x)}


def grid_posterior(case, half_width=7.0, n=601):
    obj, phi = objective_factory(case)
    mp = map_of(case)
    x0 = np.array([mp["etaCL"], mp["etaV"]])
    # Laplace SDs set the grid span; the grid covers +-half_width of them.
    h = 1e-4
    H = np.zeros((2, 2))
    for i in range(2):
        for j in range(2):
            ei, ej = np.eye(2)[i] * h, np.eye(2)[j] * h
            H[i, j] = (obj(x0 + ei + ej) - obj(x0 + ei - ej) - obj(x0 - ei + ej) + obj(x0 - ei - ej)) / (4 * h * h)
    cov = np.linalg.inv(H / 2)
    sd = np.sqrt(np.diag(cov))
    g0 = np.linspace(x0[0] - half_width * sd[0], x0[0] + half_width * sd[0], n)
    g1 = np.linspace(x0[1] - half_width * sd[1], x0[1] + half_width * sd[1], n)
    logp = np.array([[-0.5 * obj([u, w]) for w in g1] for u in g0])
    dens = np.exp(logp - logp.max())
    dens /= trapz(trapz(dens, g1, axis=1), g0)
    out = {}
    for name, axis, grid in (("CL", 1, g0), ("V", 0, g1)):
        marg = trapz(dens, g1 if axis == 1 else g0, axis=axis)
        value = np.exp(phi[name] + grid)
        mean = float(trapz(marg * value, grid))
        cdf = np.concatenate([[0.0], np.cumsum((marg[1:] + marg[:-1]) / 2 * np.diff(grid))])
        cdf /= cdf[-1]
        q = {}
        for p in (0.05, 0.95):
            eta_q = float(np.interp(p, cdf, grid))
            dens_eta = float(np.interp(eta_q, grid, marg))
            value_q = math.exp(phi[name] + eta_q)
            # density of the natural-scale value at its quantile: f_eta / value
            q[p] = {"value": value_q, "density": dens_eta / value_q}
        sdv = math.sqrt(float(trapz(marg * (value - mean) ** 2, grid)))
        out[name] = {"mean": mean, "sd": sdv, "q05": q[0.05]["value"], "q95": q[0.95]["value"], "densityAtQ05": q[0.05]["density"], "densityAtQ95": q[0.95]["density"]}
    return {"gridPoints": n, "halfWidthLaplaceSd": half_width, **out}


def main():
    result = {
        "script": "resources/validation/reference/dosing/map_posterior_scipy.py",
        "source": f"scipy {scipy.__version__} (scipy.optimize.minimize Nelder-Mead then BFGS; scipy.linalg.expm for the two-compartment model; numpy {np.__version__} trapezoid grid integration) on an independent closed-form one-compartment infusion model; invented patients",
        "patients": [],
    }
    for case in PATIENTS:
        result["patients"].append({"model": case["model"], "patient": case["patient"], "map": map_of(case)})
    result["patients2cmt"] = [{"model": c["model"], "patient": c["patient"], "map": map_2cmt(c)} for c in PATIENTS_2CMT]
    result["gridPosterior"] = {"patientIndex": 0, **grid_posterior(PATIENTS[0])}
    with open(os.path.join(HERE, "map_posterior_scipy.json"), "w") as f:
        json.dump(result, f, indent=1)
        f.write("\n")


if __name__ == "__main__":
    main()
