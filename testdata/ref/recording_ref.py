#!/usr/bin/env python3
"""Reads a dataset written by "tilebench record" with NumPy alone and checks
it against its own manifest (docs/recording.md): every file loads with
numpy.load (NEP 1), has the dtype and shape the manifest lists, and the
episode bookkeeping holds (starts, seeds, step indices, previous actions,
returns). Prints one JSON object: each array's dtype and shape as NumPy
reads them, and the checks' counts. Run live by TestRefRecordingNumpy.

    /usr/bin/python3 testdata/ref/recording_ref.py DATASET_DIR
"""
import json
import os
import sys

import numpy as np


def main(folder):
    with open(os.path.join(folder, "manifest.json")) as f:
        m = json.load(f)
    n = m["rows"]
    arrays, out = {}, {"arrays": {}}
    for spec in m["files"]:
        a = np.load(os.path.join(folder, spec["name"]))
        want = np.dtype(spec["dtype"])
        assert a.dtype == want, (spec["name"], a.dtype, want)
        assert a.shape == (n, *spec["shape"]), (spec["name"], a.shape, n, spec["shape"])
        arrays[spec["name"][:-4]] = a
        out["arrays"][spec["name"][:-4]] = {"dtype": a.dtype.str, "shape": list(a.shape)}
    starts = np.flatnonzero(arrays["episode_starts"])
    assert starts.tolist() == [e["start"] for e in m["episodes"]], "episode starts"
    bounds = list(starts) + [n]
    prev, act = arrays["prev_actions"], arrays["actions"]
    for i, e in enumerate(m["episodes"]):
        a, b = bounds[i], bounds[i + 1]
        assert b - a == e["steps"], ("steps", i)
        assert (arrays["seeds"][a:b] == e["seed"]).all(), ("seeds", i)
        assert (arrays["steps"][a:b] == np.arange(b - a)).all(), ("step index", i)
        assert (prev[a] == 0).all(), ("first previous action", i)
        assert (prev[a + 1:b] == act[a:b - 1]).all(), ("previous actions", i)
        ret = float(arrays["rewards"][a:b].astype(np.float64).sum())
        # float32 rewards: the sum agrees with the float64 return to
        # float32 precision per step (common practice).
        assert abs(ret - e["return"]) <= 1e-6 * (b - a) * max(1.0, abs(e["return"])), ("return", i, ret, e["return"])
    if "token_count" in arrays:
        cells, counts = arrays["cells"], arrays["token_count"]
        k = cells.shape[1]
        pad = np.arange(k)[None, :] >= counts[:, None]
        assert (cells[pad] == -1).all(), "padding cells"
        assert (arrays["tokens"][pad] == 0).all(), "padding tokens"
    out["episodes"] = len(m["episodes"])
    out["rows"] = n
    print(json.dumps(out))


if __name__ == "__main__":
    main(sys.argv[1])
