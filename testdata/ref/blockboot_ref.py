#!/usr/bin/python3
"""Reference values for the sequence bootstraps of tilebench/vision/stats
(blockboot.go), from Debian's numpy.

Prints JSON on stdout; the committed copy is testdata/ref/blockboot_ref.json
(regenerate: /usr/bin/python3 testdata/ref/blockboot_ref.py > testdata/ref/blockboot_ref.json).

- moving-block bootstrap of the mean (Kuensch 1989): the n-l+1 overlapping
  blocks are drawn uniformly with replacement, k = ceil(n/l) of them joined
  and cut to n values. When l divides n the bootstrap distribution of the
  mean has, exactly, E* = mean of the n-l+1 block means and
  Var* = (population variance of the block means) / k (Kuensch 1989, sec. 3;
  Lahiri 2003, "Resampling methods for dependent data", sec. 3.2, from
  memory). The percentile interval is estimated with many resamples.
- whole-sequence (cluster) bootstrap of the pooled mean: sequences drawn
  with replacement, statistic sum of drawn totals / sum of drawn lengths.
  Percentile interval with many resamples.
Percentiles: numpy.percentile, default "linear" method.
"""
import json

import numpy as np

RESAMPLES = 200000
LEVEL = 0.95
rng = np.random.default_rng(20261202)


def ar1(n, phi, scale):
    x = np.zeros(n)
    e = rng.normal(0.0, scale, size=n)
    for i in range(1, n):
        x[i] = phi * x[i - 1] + e[i]
    return np.round(np.abs(x), 4)


def mbb(x, l):
    n = len(x)
    k = -(-n // l)
    starts = rng.integers(0, n - l + 1, size=(RESAMPLES, k))
    idx = (starts[:, :, None] + np.arange(l)[None, None, :]).reshape(RESAMPLES, k * l)[:, :n]
    theta = x[idx].mean(axis=1)
    bm = np.array([x[j:j + l].mean() for j in range(n - l + 1)])
    a = (1 - LEVEL) / 2 * 100
    out = {"x": [float(v) for v in x], "block": l,
           "lo": float(np.percentile(theta, a)), "hi": float(np.percentile(theta, 100 - a)),
           "sd": float(theta.std())}
    if n % l == 0:
        out["exact_mean"] = float(bm.mean())
        out["exact_var"] = float(bm.var() / k)
    return out


def whole(seqs):
    sums = np.array([s.sum() for s in seqs])
    lens = np.array([len(s) for s in seqs], dtype=float)
    m = len(seqs)
    idx = rng.integers(0, m, size=(RESAMPLES, m))
    theta = sums[idx].sum(axis=1) / lens[idx].sum(axis=1)
    a = (1 - LEVEL) / 2 * 100
    return {"seqs": [[float(v) for v in s] for s in seqs],
            "value": float(sums.sum() / lens.sum()),
            "lo": float(np.percentile(theta, a)), "hi": float(np.percentile(theta, 100 - a)),
            "sd": float(theta.std())}


out = {"format": 1, "numpy": np.__version__, "resamples": RESAMPLES, "level": LEVEL,
       "moving_block": [mbb(ar1(120, 0.7, 1.0), 5), mbb(ar1(97, 0.3, 0.5), 4),
                        mbb(rng.binomial(1, 0.3, size=60).astype(float), 6)],
       "whole_sequence": [whole([ar1(int(rng.integers(5, 40)), 0.6, 1.0) for _ in range(12)]),
                          whole([rng.binomial(1, 0.8, size=int(rng.integers(3, 25))).astype(float) for _ in range(15)])]}
print(json.dumps(out, indent=1))
