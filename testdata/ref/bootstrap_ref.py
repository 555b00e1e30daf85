#!/usr/bin/python3
"""Reference values for tilebench/vision/stats, from Debian's numpy and scipy.

Prints JSON on stdout; the committed copy is testdata/ref/bootstrap_ref.json
(regenerate: /usr/bin/python3 testdata/ref/bootstrap_ref.py > testdata/ref/bootstrap_ref.json).

- percentiles: numpy.percentile (default "linear" method)
- iqm: scipy.stats.trim_mean(x, 0.25), the convention of Agarwal et al. 2021's code
- median, std: numpy.median, numpy.std(ddof=1)
- pi: probability of improvement P(X > Y) = U / (m n), U from scipy.stats.mannwhitneyu
- bootstrap: scipy.stats.bootstrap(method="percentile"); several samples passed
  together are resampled independently, which is the stratified bootstrap
  when the statistic pools them.
"""
import json
import sys

import numpy as np
import scipy
from scipy import stats

RESAMPLES = 20000
rng = np.random.default_rng(20240611)


def r(a):
    return [float(v) for v in a]


def iqm(x):
    return stats.trim_mean(x, 0.25, axis=None)


def pooled(stat):
    def f(*samples):
        return stat(np.concatenate(samples))
    return f


out = {"format": 1, "numpy": np.__version__, "scipy": scipy.__version__,
       "resamples": RESAMPLES, "percentiles": [], "iqm": [], "pi": [], "bootstrap": []}

# Percentiles and point statistics on a few fixed samples.
samples = [
    r(np.arange(1, 9)),
    [3.5, -1.0, 2.0, 2.0, 10.0],
    r(np.round(rng.normal(50, 12, size=13), 3)),
    r(np.round(rng.exponential(3.0, size=30), 3)),
    [7.0],
]
for x in samples:
    ps = [0, 2.5, 10, 25, 50, 62.5, 75, 97.5, 100]
    out["percentiles"].append({"x": x, "p": ps, "value": r(np.percentile(x, ps))})
for n in range(1, 14):
    x = r(np.round(rng.uniform(-5, 20, size=n), 3))
    out["iqm"].append({"x": x, "iqm": float(iqm(x)), "median": float(np.median(x)),
                       "mean": float(np.mean(x)),
                       "std": float(np.std(x, ddof=1)) if n > 1 else None})

# Probability of improvement on single strata.
for m, n, ties in [(10, 12, False), (7, 7, True), (25, 20, False)]:
    if ties:
        x = r(rng.integers(0, 5, size=m))
        y = r(rng.integers(0, 5, size=n))
    else:
        x = r(np.round(rng.normal(1.0, 1.0, size=m), 3))
        y = r(np.round(rng.normal(0.5, 1.2, size=n), 3))
    u = stats.mannwhitneyu(x, y, alternative="two-sided").statistic
    out["pi"].append({"x": x, "y": y, "p": float(u) / (m * n)})

# Bootstrap intervals.
def case(name, stat_name, strata, statistic, den=None):
    data = tuple(np.asarray(s) for s in strata)
    if den is not None:
        data = data + tuple(np.asarray(s) for s in den)
    res = stats.bootstrap(data, statistic, n_resamples=RESAMPLES, method="percentile",
                          confidence_level=0.95, vectorized=False,
                          random_state=np.random.default_rng(7))
    c = {"name": name, "stat": stat_name, "strata": [r(s) for s in strata],
         "value": float(statistic(*data)),
         "lo": float(res.confidence_interval.low), "hi": float(res.confidence_interval.high),
         "se": float(res.standard_error)}
    if den is not None:
        c["den"] = [r(s) for s in den]
    out["bootstrap"].append(c)


one = np.round(rng.normal(100, 20, size=40), 3)
case("mean, one stratum", "mean", [one], pooled(np.mean))
case("iqm, one stratum", "iqm", [one], pooled(iqm))
skew = np.round(rng.gamma(2.0, 30.0, size=30), 3)
case("median, skewed", "median", [skew], pooled(np.median))
case("iqm, skewed", "iqm", [skew], pooled(iqm))
strata = [np.round(rng.normal(mu, sd, size=k), 3) for mu, sd, k in [(40, 5, 12), (80, 15, 10), (120, 10, 15)]]
case("iqm, three strata", "iqm", strata, pooled(iqm))
case("mean, three strata", "mean", strata, pooled(np.mean))

# Retention: ratio of IQMs, stressed over clean, both resampled.
clean = [np.round(rng.normal(200, 25, size=20), 3), np.round(rng.normal(150, 20, size=20), 3)]
stressed = [np.round(rng.normal(120, 30, size=20), 3), np.round(rng.normal(60, 25, size=20), 3)]
k = len(stressed)


def retention(*s):
    return iqm(np.concatenate(s[:k])) / iqm(np.concatenate(s[k:]))


case("retention iqm, two strata", "retention-iqm", stressed, retention, den=clean)

json.dump(out, sys.stdout, indent=1)
sys.stdout.write("\n")
