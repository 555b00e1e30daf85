#!/usr/bin/python3
"""Reference values for the paired statistics of tilebench/vision/stats.

Prints JSON on stdout; the committed copy is testdata/ref/paired_ref.json
(regenerate: /usr/bin/python3 testdata/ref/paired_ref.py > testdata/ref/paired_ref.json).

- signed_rank: scipy.stats.wilcoxon(x, y, zero_method="wilcox",
  correction=False), method "exact" (no ties, no zeros, n <= 50) or "approx"
- bca: scipy.stats.bootstrap(method="BCa") on one sample, and on pairs
  (paired=True, statistic a difference)
- paired: scipy.stats.bootstrap(paired=True, method="percentile") for the
  difference and the ratio of two arms played on the same seeds
- stratified: this script's own NumPy paired bootstrap for several strata
  (each stratum's seed indices drawn once and shared by every arm) and for
  the normalised score (x - floor) / (ref - floor)
- cvar: the mean of the worst alpha share, integrating the empirical
  quantile function (Chan et al. 2020), written out in NumPy
"""
import json
import sys

import numpy as np
import scipy
from scipy import stats

RESAMPLES = 20000
rng = np.random.default_rng(20261203)


def r(a):
    return [float(v) for v in a]


def iqm(x, axis=-1):
    return stats.trim_mean(x, 0.25, axis=axis)


out = {"format": 1, "numpy": np.__version__, "scipy": scipy.__version__, "resamples": RESAMPLES,
       "signed_rank": [], "bca": [], "paired": [], "stratified": [], "cvar": []}

# Wilcoxon signed-rank.
def sr(name, x, y):
    d = np.asarray(x) - np.asarray(y)
    nz = d[d != 0]
    ties = len(np.unique(np.abs(nz))) < len(nz)
    method = "exact" if (len(nz) == len(d) and not ties and len(nz) <= 50) else "approx"
    res = stats.wilcoxon(x, y, zero_method="wilcox", correction=False, method=method)
    out["signed_rank"].append({"name": name, "x": r(x), "y": r(y), "method": method,
                               "statistic": float(res.statistic), "p": float(res.pvalue)})


a = np.round(rng.normal(10, 2, size=12), 3)
sr("exact n=12", a, np.round(a - rng.normal(0.8, 1, size=12), 3))
b = np.round(rng.normal(0, 1, size=30), 2)
sr("exact n=30", b + 0.3, b + np.round(rng.normal(0, 1, size=30), 2))
c = rng.integers(0, 6, size=25).astype(float)
sr("ties n=25", c, rng.integers(0, 6, size=25).astype(float))
e = np.round(rng.normal(5, 3, size=60), 2)
sr("approx n=60", e, np.round(e + rng.normal(-0.5, 1.5, size=60), 2))
sr("exact n=7", [3.1, 4.2, 1.5, 6.0, 2.2, 5.5, 7.3], [2.0, 4.0, 2.5, 3.0, 1.0, 5.0, 4.0])


# BCa on one sample and on pairs.
def bca1(name, stat_name, x, f):
    res = stats.bootstrap((np.asarray(x),), f, n_resamples=RESAMPLES, method="BCa",
                          confidence_level=0.95, random_state=np.random.default_rng(3))
    out["bca"].append({"name": name, "stat": stat_name, "x": r(x), "value": float(f(np.asarray(x))),
                       "lo": float(res.confidence_interval.low), "hi": float(res.confidence_interval.high),
                       "se": float(res.standard_error)})


bca1("mean, skewed n=12", "mean", np.round(rng.exponential(10, size=12), 3), np.mean)
bca1("iqm, skewed n=15", "iqm", np.round(rng.gamma(1.5, 20, size=15), 3), iqm)
bca1("mean, n=8", "mean", np.round(rng.normal(50, 10, size=8), 3), np.mean)


def pair(name, stat_name, x, y, f, method):
    res = stats.bootstrap((np.asarray(x), np.asarray(y)), f, paired=True, vectorized=True,
                          n_resamples=RESAMPLES, method=method, confidence_level=0.95,
                          random_state=np.random.default_rng(5))
    out["paired" if method == "percentile" else "bca"].append(
        {"name": name, "stat": stat_name, "x": r(x), "y": r(y), "value": float(f(np.asarray(x), np.asarray(y))),
         "lo": float(res.confidence_interval.low), "hi": float(res.confidence_interval.high),
         "se": float(res.standard_error)})


def diff_mean(x, y, axis=-1):
    return np.mean(x, axis=axis) - np.mean(y, axis=axis)


def diff_iqm(x, y, axis=-1):
    return iqm(x, axis) - iqm(y, axis)


def ratio_iqm(x, y, axis=-1):
    return iqm(x, axis) / iqm(y, axis)


# Common random numbers: a shared per-seed difficulty plus each arm's noise.
seed_effect = rng.normal(0, 30, size=40)
clean = np.round(500 + seed_effect + rng.normal(0, 5, size=40), 3)
stressed = np.round(470 + seed_effect + rng.normal(0, 5, size=40), 3)
pair("diff mean, n=40", "diff-mean", clean, stressed, diff_mean, "percentile")
pair("diff iqm, n=40", "diff-iqm", clean, stressed, diff_iqm, "percentile")
pair("ratio iqm, n=40", "ratio-iqm", stressed, clean, ratio_iqm, "percentile")
pair("diff mean BCa, n=12", "diff-mean", clean[:12], stressed[:12], diff_mean, "BCa")
pair("diff iqm BCa, n=16", "diff-iqm", clean[:16], stressed[:16], diff_iqm, "BCa")


# Stratified paired bootstrap and the normalised score, NumPy.
def strat_boot(name, stat_name, arms, f):
    # arms: list of arms, each a list of strata (equal lengths across arms)
    k = len(arms[0])
    theta = np.empty(RESAMPLES)
    g = np.random.default_rng(11)
    for b in range(RESAMPLES):
        idx = [g.integers(0, len(arms[0][s]), size=len(arms[0][s])) for s in range(k)]
        vals = [iqm(np.concatenate([np.asarray(arm[s])[idx[s]] for s in range(k)])) for arm in arms]
        theta[b] = f(vals)
    full = [iqm(np.concatenate([np.asarray(s) for s in arm])) for arm in arms]
    out["stratified"].append({"name": name, "stat": stat_name, "arms": [[r(s) for s in arm] for arm in arms],
                              "value": float(f(full)),
                              "lo": float(np.percentile(theta, 2.5)), "hi": float(np.percentile(theta, 97.5)),
                              "se": float(np.std(theta, ddof=1))})


eff = [rng.normal(0, 20, size=25), rng.normal(0, 40, size=25)]
xs = [np.round(300 + eff[0] + rng.normal(0, 8, size=25), 3), np.round(100 + eff[1] + rng.normal(0, 8, size=25), 3)]
ys = [np.round(280 + eff[0] + rng.normal(0, 8, size=25), 3), np.round(90 + eff[1] + rng.normal(0, 8, size=25), 3)]
strat_boot("diff iqm, two strata", "diff-iqm", [xs, ys], lambda v: v[0] - v[1])
# Normalised: a stressed arm, its clean reference and an idle floor (all
# negative-capable returns), the same 30 seeds.
eff = rng.normal(0, 10, size=30)
floor = np.round(-100 + rng.normal(0, 3, size=30), 3)
ref = np.round(40 + eff + rng.normal(0, 3, size=30), 3)
stressed = np.round(-5 + eff + rng.normal(0, 6, size=30), 3)
strat_boot("normalised, negative returns", "normalised", [[stressed], [ref], [floor]],
           lambda v: (v[0] - v[2]) / (v[1] - v[2]))


# CVaR worked by the integral of the empirical quantile function.
def cvar(x, alpha):
    s = np.sort(np.asarray(x, dtype=float))
    m = alpha * len(s)
    k = int(np.floor(m + 1e-9))
    tot = s[:k].sum()
    if m - k > 1e-9 and k < len(s):
        tot += (m - k) * s[k]
    return tot / m


for x, alpha in [(list(range(1, 11)), 0.1), (list(range(1, 11)), 0.25), (r(np.round(rng.normal(0, 1, size=37), 3)), 0.1),
                 ([5.0, -3.0, 2.0], 0.5), ([4.0], 0.1)]:
    out["cvar"].append({"x": [float(v) for v in x], "alpha": alpha, "value": float(cvar(x, alpha))})

# The difference of two normalised scores (two policies' retentions over
# one floor) on the same 30 seeds, appended last so that the draws above
# keep their values.
eff = rng.normal(0, 10, size=30)
floor = np.round(-100 + rng.normal(0, 3, size=30), 3)
ref_a = np.round(40 + eff + rng.normal(0, 3, size=30), 3)
x_a = np.round(-5 + eff + rng.normal(0, 6, size=30), 3)
ref_b = np.round(45 + eff + rng.normal(0, 3, size=30), 3)
x_b = np.round(-30 + eff + rng.normal(0, 6, size=30), 3)
strat_boot("normalised difference, two policies", "normalised-diff", [[x_a], [ref_a], [x_b], [ref_b], [floor]],
           lambda v: (v[0] - v[4]) / (v[1] - v[4]) - (v[2] - v[4]) / (v[3] - v[4]))

json.dump(out, sys.stdout, indent=1)
sys.stdout.write("\n")
