#!/usr/bin/python3
"""Reference for tilebench's .npy reader and writer (patch/frameio).

NumPy (Debian python3-numpy) is the outside source: NEP 1 is NumPy's own
format, numpy.save/numpy.load its reference implementation.

  npy_ref.py write DIR   write the golden inputs that NumPy produced
                         (committed in patch/frameio/testdata/npy)
  npy_ref.py check FILE  load FILE with numpy.load and print a JSON
                         summary: shape, dtype, order, SHA-256 of the data
                         and whether numpy.save writes the same bytes

Array contents follow one formula, value = (31 t + 7 y + 3 x + 11 c) mod 256
over the (frame, row, column, channel) index, so the Go test can rebuild
every array on its own.
"""
import hashlib
import io
import json
import os
import sys

import numpy as np


def pattern(shape):
    """The formula above over a T×H×W×C (or shorter) index grid."""
    full = list(shape) + [1] * (4 - len(shape))
    t, y, x, c = np.indices(full)
    a = (31 * t + 7 * y + 3 * x + 11 * c) % 256
    return a.reshape(shape).astype(np.uint8)


def write(d):
    os.makedirs(d, exist_ok=True)
    # T×H×W×C colour, the layout tilebench writes.
    np.save(os.path.join(d, "thwc_2x5x7x3.npy"), pattern((2, 5, 7, 3)))
    # T×H×W×1 grey.
    np.save(os.path.join(d, "thwc_3x4x6x1.npy"), pattern((3, 4, 6, 1)))
    # H×W×C: one colour frame.
    np.save(os.path.join(d, "hwc_6x5x3.npy"), pattern((6, 5, 3)))
    # T×H×W: grey frames without a channel axis.
    np.save(os.path.join(d, "thw_4x3x5.npy"), pattern((4, 3, 5)))
    # Format version 2.0 (4-byte header length).
    with open(os.path.join(d, "v2_2x3x4x3.npy"), "wb") as f:
        np.lib.format.write_array(f, pattern((2, 3, 4, 3)), version=(2, 0))
    # Files that must be refused.
    np.save(os.path.join(d, "bad_fortran_2x3x4x3.npy"), np.asfortranarray(pattern((2, 3, 4, 3))))
    np.save(os.path.join(d, "bad_float32_2x3x3.npy"), pattern((2, 3, 3)).astype(np.float32))
    np.save(os.path.join(d, "bad_channels_1x2x2x4.npy"), np.zeros((1, 2, 2, 4), np.uint8))
    np.save(os.path.join(d, "bad_rank2_4x4.npy"), np.zeros((4, 4), np.uint8))


def check(path):
    with open(path, "rb") as f:
        raw = f.read()
    a = np.load(io.BytesIO(raw), allow_pickle=False)
    buf = io.BytesIO()
    np.save(buf, a)
    out = {
        "shape": list(a.shape),
        "dtype": str(a.dtype),
        "fortran": bool(np.isfortran(a)) and a.ndim > 1,
        "sha256": hashlib.sha256(np.ascontiguousarray(a).tobytes()).hexdigest(),
        "same_bytes_as_numpy_save": buf.getvalue() == raw,
        "matches_pattern": bool(np.array_equal(a, pattern(a.shape))),
    }
    json.dump(out, sys.stdout)
    sys.stdout.write("\n")


if __name__ == "__main__":
    if len(sys.argv) != 3 or sys.argv[1] not in ("write", "check"):
        sys.exit(__doc__)
    {"write": write, "check": check}[sys.argv[1]](sys.argv[2])
