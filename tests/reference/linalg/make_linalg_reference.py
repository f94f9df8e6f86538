#!/usr/bin/python3
"""Reference values for engine/linalg.

Sources: numpy.linalg (cholesky, inv, slogdet, eigvalsh; LAPACK underneath) and scipy.linalg
(lu_factor) from Debian's python3-numpy / python3-scipy; the Hilbert matrix inverse is exact
integer arithmetic (Python fractions), so it needs no library at all.
Run: /usr/bin/python3 tests/reference/linalg/make_linalg_reference.py > tests/reference/linalg/linalg.json
"""
import json
from fractions import Fraction

import numpy as np
import scipy
import scipy.linalg


def exact_inverse(m):
    n = len(m)
    a = [[Fraction(x) for x in row] + [Fraction(int(i == j)) for j in range(n)] for i, row in enumerate(m)]
    for c in range(n):
        p = next(r for r in range(c, n) if a[r][c] != 0)
        a[c], a[p] = a[p], a[c]
        piv = a[c][c]
        a[c] = [x / piv for x in a[c]]
        for r in range(n):
            if r != c and a[r][c] != 0:
                f = a[r][c]
                a[r] = [x - f * y for x, y in zip(a[r], a[c])]
    return [[row[n + j] for j in range(n)] for row in a]


def flat(m):
    return [float(x) for row in m for x in row]


rng = np.random.default_rng(20261201)
spd = []
for n in (2, 3, 5, 8, 12):
    x = rng.standard_normal((n, n))
    a = x @ x.T + n * np.eye(n)
    sign, logdet = np.linalg.slogdet(a)
    spd.append({
        "n": n,
        "a": a.ravel().tolist(),
        "cholesky": np.linalg.cholesky(a).ravel().tolist(),
        "inverse": np.linalg.inv(a).ravel().tolist(),
        "logDet": logdet,
        "eigenvalues": np.sort(np.linalg.eigvalsh(a)).tolist(),
        "b": rng.standard_normal(n).tolist(),
    })
    spd[-1]["solution"] = np.linalg.solve(a, np.array(spd[-1]["b"])).tolist()

general = []
for n in (3, 6):
    a = rng.standard_normal((n, n))
    sign, logdet = np.linalg.slogdet(a)
    lu, piv = scipy.linalg.lu_factor(a)
    general.append({"n": n, "a": a.ravel().tolist(), "inverse": np.linalg.inv(a).ravel().tolist(),
                    "logAbsDet": logdet, "sign": sign})

hilbert = []
for n in (4, 6, 8):
    h = [[Fraction(1, i + j + 1) for j in range(n)] for i in range(n)]
    hinv = exact_inverse(h)
    hilbert.append({"n": n, "a": flat(h), "inverseExact": [int(x) for row in hinv for x in row],
                    "eigenvalues": np.sort(np.linalg.eigvalsh(np.array(flat(h)).reshape(n, n))).tolist()})

print(json.dumps({
    "script": "tests/reference/linalg/make_linalg_reference.py",
    "source": "numpy %s / scipy %s (LAPACK); Hilbert inverses exact (fractions)" % (np.__version__, scipy.__version__),
    "spd": spd,
    "general": general,
    "hilbert": hilbert,
}))
