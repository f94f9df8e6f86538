#!/usr/bin/python3
"""Reference values for the standard normal CDF, log-CDF and quantile.

Source: mpmath (arbitrary-precision arithmetic, Debian python3-mpmath) at 60 significant digits,
mpmath.ncdf and mpmath.erfinv/findroot; each double input is taken exactly (mpf of the binary
value), so the stored value is the correctly rounded answer for that double.
Run: /usr/bin/python3 tests/reference/normal/make_normal_reference.py > tests/reference/normal/normal.json
"""
import json
import mpmath

mpmath.mp.dps = 60

xs = [-1e5, -1000.0, -200.0, -40.0, -38.0, -37.5, -30.0, -20.0, -10.0, -8.0, -5.0, -3.0, -2.0, -1.5, -1.0,
      -0.6629, -0.6630, -0.5, -0.1, 0.0, 0.1, 0.5, 0.6630, 1.0, 1.959963984540054, 2.5, 4.0, 6.0, 8.0, 10.0]
ps = [1e-300, 1e-200, 1e-100, 1e-50, 1e-20, 1e-15, 1e-10, 1e-5, 1e-3, 0.01, 0.025, 0.05, 0.074, 0.076, 0.1,
      0.25, 0.3, 0.4999, 0.5, 0.6, 0.75, 0.9, 0.925, 0.95, 0.975, 0.99, 0.999, 0.999999]


def ncdf(x):
    return mpmath.ncdf(mpmath.mpf(x))


def quantile(p):
    p = mpmath.mpf(p)
    return -mpmath.sqrt(2) * mpmath.erfinv(1 - 2 * p) if p > 1e-15 else mpmath.findroot(
        lambda x: mpmath.log(mpmath.ncdf(x)) - mpmath.log(p), -mpmath.sqrt(-2 * mpmath.log(p)))


cdf = []
for x in xs:
    c = ncdf(x)
    cdf.append({"x": x, "cdf": float(c), "logCdf": float(mpmath.log(c))})
q = []
for p in ps:
    v = quantile(p)
    # Check the root to the working precision.
    assert abs(mpmath.ncdf(v) / mpmath.mpf(p) - 1) < mpmath.mpf(10) ** -40, p
    q.append({"p": p, "x": float(v)})

print(json.dumps({
    "script": "tests/reference/normal/make_normal_reference.py",
    "source": "mpmath %s at %d significant digits (ncdf, erfinv, findroot); inputs are the exact doubles" % (mpmath.__version__, mpmath.mp.dps),
    "cdf": cdf,
    "quantile": q,
}, indent=1))
