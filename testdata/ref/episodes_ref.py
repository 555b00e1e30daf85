#!/usr/bin/python3
"""Reference for the .npy episodes files tilebench probe reads
(vision/probe, --episodes).

NumPy (Debian python3-numpy) is the outside source: numpy.save writes the
arrays, numpy.flatnonzero says where each mask's sequences start.

  episodes_ref.py write DIR   write the golden arrays (committed in
                              vision/probe/testdata/episodes) and
                              starts.json: file name -> start indices
"""
import json
import os
import sys

import numpy as np

FRAMES = 20
STARTS = [0, 5, 6, 12]


def write(d):
    os.makedirs(d, exist_ok=True)
    mask = np.zeros(FRAMES, dtype=np.bool_)
    mask[STARTS] = True
    arrays = {
        # What tilebench record writes as episode_starts.npy.
        "mask_bool.npy": mask,
        "mask_uint8.npy": mask.astype(np.uint8),
        # Start indices, as numpy.flatnonzero returns them.
        "starts_int64.npy": np.flatnonzero(mask),
        "starts_int32.npy": np.flatnonzero(mask).astype(np.int32),
        "starts_uint16.npy": np.flatnonzero(mask).astype(np.uint16),
    }
    starts = {}
    for name, a in arrays.items():
        np.save(os.path.join(d, name), a)
        back = np.load(os.path.join(d, name))
        if back.dtype == np.bool_ or back.dtype == np.uint8:
            starts[name] = [int(i) for i in np.flatnonzero(back)]
        else:
            starts[name] = [int(i) for i in back]
    with open(os.path.join(d, "starts.json"), "w") as f:
        json.dump({"frames": FRAMES, "starts": starts}, f, indent=1, sort_keys=True)
        f.write("\n")


if __name__ == "__main__":
    if len(sys.argv) != 3 or sys.argv[1] != "write":
        sys.exit(__doc__)
    write(sys.argv[2])
