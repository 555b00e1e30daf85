#!/usr/bin/python3
"""Reference for tilebench's circuits (games/drive).

A circuit is a chain of pieces, each a straight or a bend of constant
curvature. Its centreline is the solution of the plane curve equations in
arc length s:

    x'(s) = cos(h),  y'(s) = sin(h),  h'(s) = kappa(s)

with kappa piecewise constant. This script integrates them with
scipy.integrate.solve_ivp (DOP853, tight tolerances), piece by piece from
the start line, and reports the position and heading at the requested arc
lengths and at the end of the last piece (which closes on the start line
for a closed circuit).

usage: circuit_ref.py INPUT.json
INPUT: {"circuits": [{"start": [x, y, h], "pieces": [[length, kappa], ...], "s": [...]}]}
prints the same document with "at": [[x, y, h] at each s] and "end": [x, y, h] added.
"""
import json
import math
import sys

from scipy.integrate import solve_ivp


def walk(start, pieces, queries):
    state = list(start)
    s0 = 0.0
    out = {}
    qs = sorted(set(queries))
    for length, kappa in pieces:
        def f(_s, q, kappa=kappa):
            return [math.cos(q[2]), math.sin(q[2]), kappa]
        inside = [q for q in qs if s0 <= q <= s0 + length]
        sol = solve_ivp(f, (s0, s0 + length), state, method="DOP853", rtol=1e-12, atol=1e-12,
                        t_eval=inside if inside else None, dense_output=False)
        for q, i in zip(inside, range(len(inside))):
            out.setdefault(q, [float(z) for z in sol.y[:, i]])
        full = solve_ivp(f, (s0, s0 + length), state, method="DOP853", rtol=1e-12, atol=1e-12)
        state = [float(z) for z in full.y[:, -1]]
        s0 += length
    return [out[q] for q in queries], state


def main():
    with open(sys.argv[1]) as f:
        doc = json.load(f)
    for c in doc["circuits"]:
        c["at"], c["end"] = walk(c["start"], c["pieces"], c["s"])
    doc["source"] = "scipy.integrate.solve_ivp (DOP853) of x'=cos h, y'=sin h, h'=kappa"
    json.dump(doc, sys.stdout, indent=1)
    sys.stdout.write("\n")


if __name__ == "__main__":
    main()
