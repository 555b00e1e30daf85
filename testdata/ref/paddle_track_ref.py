#!/usr/bin/python3
"""Reference for tilebench's paddle track (games/paddle): when a ball
moving in a straight line from inside a circle meets it, and how it leaves
a mirror there.

For each shot the time is the positive root of the quadratic
|d + v t|^2 = rho^2 (d the offset from the circle's centre), found with
numpy.roots, and the reflected velocity is the Householder reflection
(I - 2 n n^T) v about the unit normal n at the meeting point, a matrix
product in NumPy.

usage: paddle_track_ref.py INPUT.json
INPUT: {"centre": [cx, cy], "rho": rho, "shots": [{"ball": [x, y, vx, vy]}, ...]}
prints the same document with "t" and "after": [vx, vy] added to each shot.
"""
import json
import sys

import numpy as np


def main():
    with open(sys.argv[1]) as f:
        doc = json.load(f)
    c = np.array(doc["centre"], dtype=np.float64)
    rho = float(doc["rho"])
    for s in doc["shots"]:
        x, y, vx, vy = s["ball"]
        d = np.array([x, y]) - c
        v = np.array([vx, vy])
        roots = np.roots([v @ v, 2 * (d @ v), d @ d - rho * rho])
        t = float(max(r.real for r in roots))
        p = d + v * t
        n = p / np.linalg.norm(p)
        h = np.eye(2) - 2 * np.outer(n, n)
        s["t"] = t
        s["after"] = [float(z) for z in h @ v]
    doc["source"] = "numpy.roots, Householder reflection in NumPy"
    json.dump(doc, sys.stdout)


if __name__ == "__main__":
    main()
