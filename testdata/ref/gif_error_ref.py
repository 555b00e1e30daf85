#!/usr/bin/python3
"""Measure, with NumPy, how far a decoded GIF is from the frames written.

Usage: gif_error_ref.py ORIGINAL.npy DECODED.npy

Both are uint8 arrays T×H×W×3 (NEP 1 .npy, read by numpy.load). Prints
one JSON object: the largest absolute difference in any channel, the
largest per channel, the mean absolute difference, and the number of
distinct colours in each array (numpy.unique over the packed pixels).
"""
import json
import sys

import numpy as np


def main():
    a = np.load(sys.argv[1]).astype(np.int16)
    b = np.load(sys.argv[2]).astype(np.int16)
    if a.shape != b.shape:
        raise SystemExit(f"shapes differ: {a.shape} and {b.shape}")
    d = np.abs(a - b)
    def colours(x):
        px = x.reshape(-1, 3).astype(np.int32)
        return int(np.unique((px[:, 0] << 16) | (px[:, 1] << 8) | px[:, 2]).size)

    print(json.dumps({
        "max": int(d.max()),
        "max_per_channel": [int(v) for v in d.reshape(-1, d.shape[-1]).max(axis=0)],
        "mean": float(d.mean()),
        "colours_original": colours(a),
        "colours_decoded": colours(b),
    }))


if __name__ == "__main__":
    main()
