#!/usr/bin/python3
"""Textbook closed-form concentrations for the one- and two-compartment models, evaluated with
mpmath at 40 significant digits, for the installation verification suite (resources/validation).

The formulas (each case names its own):
- one compartment, iv bolus: C(t) = D/V exp(-k t), k = CL/V;
- one compartment, constant-rate infusion over T: C(t) = k0/CL (1 - exp(-k t)) while it runs,
  C(T) exp(-k (t - T)) after, k0 = D/T;
- one compartment, first-order absorption (Bateman function) with lag tlag and bioavailability F:
  C(t) = F D ka / (V (ka - k)) (exp(-k t') - exp(-ka t')), t' = t - tlag;
- one compartment, iv bolus at steady state, interval tau: C(t) = D/V exp(-k t) / (1 - exp(-k tau));
- one compartment, intermittent infusion at steady state (Sawchuk & Zaske 1976):
  Cmax = k0 (1 - exp(-k T)) / (CL (1 - exp(-k tau))), Cmin = Cmax exp(-k (tau - T)), and
  AUC over one interval = D / CL, so AUC24 = D (24 / tau) / CL;
- two compartments, iv bolus, bi-exponential: C(t) = A exp(-alpha t) + B exp(-beta t) with
  alpha, beta the roots of s^2 - (k10 + k12 + k21) s + k10 k21, A = D/V1 (alpha - k21)/(alpha - beta),
  B = D/V1 (k21 - beta)/(alpha - beta).
Sources (from memory): Gibaldi M, Perrier D. Pharmacokinetics, 2nd ed. Marcel Dekker 1982,
chapters 1-2; Bateman H. Proc Camb Philos Soc 1910;15:423-427; Sawchuk RJ, Zaske DE.
J Pharmacokinet Biopharm 1976;4:183-195.

Parameters are given in the model's parameter order (1cmt: CL, V, ka, tlag, F; 2cmt: CL, V1, Q,
V2, ka, tlag, F; null = not used). Times h, doses mg, concentrations mg/L. A level at a dose time
is taken before that dose (the application's convention), so no time here equals a dose time.

Run: /usr/bin/python3 resources/validation/reference/closed-form/make_closed_form.py  (writes closed_form.json here)
"""
import json
import os

import mpmath as mp

mp.mp.dps = 40


def f(x):
    return float(x)


def bolus_1cmt(cl, v, d, t):
    k = mp.mpf(cl) / v
    return d / mp.mpf(v) * mp.exp(-k * t)


def infusion_1cmt(cl, v, d, dur, t):
    k = mp.mpf(cl) / v
    k0 = mp.mpf(d) / dur
    if t <= dur:
        return k0 / cl * (1 - mp.exp(-k * t))
    return k0 / cl * (1 - mp.exp(-k * dur)) * mp.exp(-k * (t - dur))


def oral_1cmt(cl, v, ka, tlag, fbio, d, t):
    k = mp.mpf(cl) / v
    tp = mp.mpf(t) - tlag
    if tp <= 0:
        return mp.mpf(0)
    return fbio * d * ka / (v * (ka - k)) * (mp.exp(-k * tp) - mp.exp(-ka * tp))


def bolus_ss_1cmt(cl, v, d, tau, t):
    k = mp.mpf(cl) / v
    return d / mp.mpf(v) * mp.exp(-k * t) / (1 - mp.exp(-k * tau))


def bolus_2cmt(cl, v1, q, v2, d, t):
    k10, k12, k21 = mp.mpf(cl) / v1, mp.mpf(q) / v1, mp.mpf(q) / v2
    s = k10 + k12 + k21
    disc = mp.sqrt(s * s - 4 * k10 * k21)
    alpha, beta = (s + disc) / 2, (s - disc) / 2
    a = d / mp.mpf(v1) * (alpha - k21) / (alpha - beta)
    b = d / mp.mpf(v1) * (k21 - beta) / (alpha - beta)
    return a * mp.exp(-alpha * t) + b * mp.exp(-beta * t)


def main():
    times = [0.25, 0.5, 1, 2, 3.5, 6, 9, 12, 18, 24, 36, 48]
    cases = []

    def add(name, formula, model, params, doses, conc):
        cases.append({"name": name, "formula": formula, "model": model, "params": params, "doses": doses,
                      "times": times, "concMgL": [f(conc(mp.mpf(t))) for t in times]})

    add("1cmt iv bolus 500 mg, CL 4 L/h, V 40 L", "C = D/V exp(-k t) (Gibaldi & Perrier 1982, ch. 1)", "1cmt",
        [4, 40, None, None, None], [{"time_h": 0, "amount_mg": 500, "route": "bolus", "duration_h": 0}],
        lambda t: bolus_1cmt(4, 40, 500, t))
    add("1cmt infusion 1000 mg over 1.5 h, CL 3.2 L/h, V 55 L", "k0/CL (1 - exp(-k t)), then decay (Gibaldi & Perrier 1982, ch. 2)", "1cmt",
        [3.2, 55, None, None, None], [{"time_h": 0, "amount_mg": 1000, "route": "infusion", "duration_h": 1.5}],
        lambda t: infusion_1cmt(3.2, 55, 1000, 1.5, t))
    add("1cmt oral 300 mg, CL 2.8 L/h, V 32 L, ka 1.3 /h, tlag 0.4 h, F 0.85", "Bateman function with lag (Bateman 1910; Gibaldi & Perrier 1982, ch. 1)", "1cmt",
        [2.8, 32, 1.3, 0.4, 0.85], [{"time_h": 0, "amount_mg": 300, "route": "oral", "duration_h": 0}],
        lambda t: oral_1cmt(2.8, 32, 1.3, 0.4, 0.85, 300, t))
    add("1cmt iv bolus 250 mg every 8 h at steady state, CL 5 L/h, V 30 L (times after the last dose)",
        "D/V exp(-k t) / (1 - exp(-k tau)) (Gibaldi & Perrier 1982, ch. 1)", "1cmt",
        [5, 30, None, None, None], [{"time_h": 0, "amount_mg": 250, "route": "bolus", "duration_h": 0, "ss_interval_h": 8}],
        lambda t: bolus_ss_1cmt(5, 30, 250, 8, t))
    add("2cmt iv bolus 1000 mg, CL 6 L/h, V1 20 L, Q 9 L/h, V2 45 L", "bi-exponential A exp(-alpha t) + B exp(-beta t) (Gibaldi & Perrier 1982, ch. 2)", "2cmt",
        [6, 20, 9, 45, None, None, None], [{"time_h": 0, "amount_mg": 1000, "route": "bolus", "duration_h": 0}],
        lambda t: bolus_2cmt(6, 20, 9, 45, 1000, t))

    steady = []
    for cl, v, dose, tau, dur in [(3.2, 55, 1250, 12, 1.5), (1.1, 70, 1000, 24, 2), (6.0, 20, 400, 8, 0.5)]:
        k = mp.mpf(cl) / v
        k0 = mp.mpf(dose) / dur
        cmax = k0 * (1 - mp.exp(-k * dur)) / (cl * (1 - mp.exp(-k * tau)))
        cmin = cmax * mp.exp(-k * (tau - dur))
        steady.append({"name": f"1cmt intermittent infusion {dose} mg q{tau}h over {dur} h at steady state, CL {cl} L/h, V {v} L",
                       "formula": "Cmax = k0 (1 - exp(-kT)) / (CL (1 - exp(-k tau))), Cmin = Cmax exp(-k (tau - T)), AUC24 = D (24/tau) / CL (Sawchuk & Zaske 1976)",
                       "model": "1cmt", "params": [cl, v, None, 0, 1],
                       "regimen": {"doseMg": dose, "intervalH": tau, "durationH": dur, "route": "infusion"},
                       "auc24": f(mp.mpf(dose) * (mp.mpf(24) / tau) / cl), "trough": f(cmin), "peak": f(cmax)})

    out = {
        "script": "resources/validation/reference/closed-form/make_closed_form.py",
        "source": "textbook closed forms (Gibaldi & Perrier 1982; Bateman 1910; Sawchuk & Zaske 1976; from memory) evaluated with mpmath at 40 digits",
        "generatedWith": {"mpmath": mp.__version__},
        "notes": "params in the model's parameter order (null = not used); times h, doses mg, concentrations mg/L; steadyState: metrics of one dosing interval at steady state",
        "cases": cases,
        "steadyState": steady,
    }
    here = os.path.dirname(os.path.abspath(__file__))
    with open(os.path.join(here, "closed_form.json"), "w") as fh:
        json.dump(out, fh, indent=1)
        fh.write("\n")


if __name__ == "__main__":
    main()
