#!/usr/bin/python3
"""Reference values for engine/posthoc's distribution functions and normality test, from scipy
(scipy.stats.shapiro, scipy.stats.t.cdf, scipy.stats.chi2.cdf, scipy.special.betainc,
scipy.special.gammainc, scipy.special.gammaln). Writes distributions.json beside this script.

Run from the repository root:  /usr/bin/python3 tests/reference/posthoc/make_distributions_reference.py
"""
import json
import os
import platform

import numpy as np
import scipy
from scipy import special, stats

HERE = os.path.dirname(os.path.abspath(__file__))

rng = np.random.default_rng(20261201)
samples = []
for n, kind in [(3, 'normal'), (4, 'normal'), (5, 'normal'), (7, 'normal'), (11, 'normal'), (12, 'normal'),
                (20, 'normal'), (50, 'exponential'), (132, 'normal'), (300, 'uniform'), (1000, 'normal'), (2000, 't3')]:
    if kind == 'normal':
        x = rng.normal(size=n)
    elif kind == 'exponential':
        x = rng.exponential(size=n)
    elif kind == 'uniform':
        x = rng.uniform(size=n)
    else:
        x = rng.standard_t(3, size=n)
    x = np.round(x, 6)
    w, p = stats.shapiro(x)
    samples.append({'n': n, 'kind': kind, 'values': x.tolist(), 'W': float(w), 'pValue': float(p)})

t_cdf = [{'t': t, 'df': df, 'cdf': float(stats.t.cdf(t, df))} for t in [-3.5, -1.2, 0.0, 0.7, 2.5] for df in [1, 2.5, 7, 30, 131]]
chi2_cdf = [{'x': x, 'df': df, 'cdf': float(stats.chi2.cdf(x, df))} for x in [0.3, 2.0, 9.5, 40.0, 131.0, 160.0] for df in [1, 3, 10, 131]]
betainc = [{'x': x, 'a': a, 'b': b, 'value': float(special.betainc(a, b, x))} for x in [0.01, 0.3, 0.77, 0.999] for a, b in [(0.5, 0.5), (2, 3), (15.5, 0.5), (60, 40)]]
gammaln = [{'x': x, 'value': float(special.gammaln(x))} for x in [0.1, 0.5, 1.0, 3.7, 10.0, 65.5, 500.0]]

out = {
    'script': 'tests/reference/posthoc/make_distributions_reference.py',
    'source': 'scipy %s (scipy.stats.shapiro: Royston 1995 algorithm AS R94; scipy.stats.t, scipy.stats.chi2, scipy.special.betainc, scipy.special.gammaln); samples drawn with numpy default_rng(20261201), rounded to 6 decimals' % scipy.__version__,
    'generatedWith': {'python': platform.python_version(), 'numpy': np.__version__, 'scipy': scipy.__version__},
    'shapiro': samples,
    'tCdf': t_cdf,
    'chi2Cdf': chi2_cdf,
    'betainc': betainc,
    'gammaln': gammaln,
}
with open(os.path.join(HERE, 'distributions.json'), 'w') as f:
    json.dump(out, f, indent=1)
print('wrote distributions.json')
