#!/usr/bin/python3
"""Reference for tilebench's car (games/drive): the kinematic bicycle model
with the reference point on the rear axle (Rajamani, Vehicle Dynamics and
Control, section 2.2, with l_r = 0):

    x' = v cos(psi),  y' = v sin(psi),  psi' = v tan(delta) / L,  v' = a

integrated with scipy.integrate.solve_ivp (DOP853, tight tolerances), the
steering angle delta and acceleration a held constant over each step.

usage: bicycle_ref.py INPUT.json
INPUT: {"wheelbase": L, "dt": dt, "runs": [{"start": [x, y, psi, v], "inputs": [[delta, a], ...]}]}
prints the same document with "states": [[x, y, psi, v] after each step] added to each run.
"""
import json
import math
import sys

from scipy.integrate import solve_ivp


def run(L, dt, start, inputs):
    s = list(start)
    out = []
    for delta, a in inputs:
        def f(_t, q, delta=delta, a=a):
            x, y, psi, v = q
            return [v * math.cos(psi), v * math.sin(psi), v * math.tan(delta) / L, a]
        sol = solve_ivp(f, (0.0, dt), s, method="DOP853", rtol=1e-12, atol=1e-12)
        s = [float(z) for z in sol.y[:, -1]]
        out.append(s)
    return out


def main():
    with open(sys.argv[1]) as f:
        doc = json.load(f)
    for r in doc["runs"]:
        r["states"] = run(doc["wheelbase"], doc["dt"], r["start"], r["inputs"])
    doc["source"] = "scipy.integrate.solve_ivp (DOP853)"
    json.dump(doc, sys.stdout, indent=1)
    sys.stdout.write("\n")


if __name__ == "__main__":
    main()
