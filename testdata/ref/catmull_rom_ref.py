#!/usr/bin/python3
"""Reference for tilebench's circuit spline (games/drive).

A uniform Catmull-Rom spline through closed control points P[0..n-1] is the
cubic Hermite spline on knots 0..n with the tangent (P[k+1] - P[k-1]) / 2 at
knot k (Catmull & Rom 1974). This script builds it with SciPy's
CubicHermiteSpline, evaluates position and signed curvature at the given
parameters, and integrates each segment's arc length with scipy.integrate.quad.

usage: catmull_rom_ref.py INPUT.json   (INPUT: {"circuits": [{"control": [[x, y], ...], "t": [...]}]})
prints the same document with "pos", "kappa" and "segment_length" added.
"""
import json
import sys

import numpy as np
from scipy.integrate import quad
from scipy.interpolate import CubicHermiteSpline


def reference(control, ts):
    p = np.asarray(control, dtype=np.float64)
    n = len(p)
    knots = np.arange(n + 1, dtype=np.float64)
    pts = np.vstack([p, p[:1]])
    tan = (np.roll(p, -1, axis=0) - np.roll(p, 1, axis=0)) / 2
    tans = np.vstack([tan, tan[:1]])
    sp = CubicHermiteSpline(knots, pts, tans, axis=0)
    d1, d2 = sp.derivative(1), sp.derivative(2)
    t = np.asarray(ts, dtype=np.float64)
    pos = sp(t)
    a, b = d1(t), d2(t)
    speed = np.hypot(a[:, 0], a[:, 1])
    kappa = (a[:, 0] * b[:, 1] - a[:, 1] * b[:, 0]) / speed**3
    seg = []
    for k in range(n):
        val, _ = quad(lambda u: float(np.hypot(*d1(u))), k, k + 1, epsabs=1e-12, epsrel=1e-12, limit=200)
        seg.append(val)
    return pos.tolist(), kappa.tolist(), seg


def main():
    with open(sys.argv[1]) as f:
        doc = json.load(f)
    for c in doc["circuits"]:
        c["pos"], c["kappa"], c["segment_length"] = reference(c["control"], c["t"])
    doc["source"] = "scipy.interpolate.CubicHermiteSpline + scipy.integrate.quad"
    json.dump(doc, sys.stdout, indent=1)
    sys.stdout.write("\n")


if __name__ == "__main__":
    main()
