#!/usr/bin/python3
"""Reference tokenizer for tilebench's patch package, written with NumPy.

Cuts uint8 frames into patch tokens with NumPy's pad / reshape / transpose
(and sliding_window_view for overlapping strides) and prints, as JSON, the
input frames and the float32 tokens, for several grid geometries.

    /usr/bin/python3 testdata/ref/tokenize_ref.py > patch/testdata/tokenize_golden.json

Token layout (tilebench's): tokens in row-major grid order; inside a token
row-major over the patch's pixels, channels last. Values float32(b)/255.
RGB to one channel: BT.601 luma, float32(299 R + 587 G + 114 B) / 255000.
Needs only Debian's python3-numpy.
"""
import json
import sys

import numpy as np

CASES = [
    # name, width, height, channels in the frame, channels of the tokens,
    # patch w, patch h, stride x, stride y, edge, fill
    ("square", 16, 16, 3, 3, 4, 4, 4, 4, "pad", 0.0),
    ("rect-patch", 12, 8, 3, 3, 4, 2, 4, 2, "strict", 0.0),
    ("pad", 10, 7, 3, 3, 4, 4, 4, 4, "pad", 0.25),
    ("crop", 10, 7, 3, 3, 4, 4, 4, 4, "crop", 0.0),
    ("overlap", 12, 10, 3, 3, 4, 4, 2, 2, "strict", 0.0),
    ("overlap-pad", 11, 9, 3, 3, 4, 4, 3, 3, "pad", 1.0),
    ("overlap-crop", 11, 9, 3, 3, 4, 3, 3, 2, "crop", 0.0),
    ("grey", 12, 8, 1, 1, 4, 4, 4, 4, "strict", 0.0),
    ("grey-to-rgb", 8, 8, 1, 3, 4, 4, 4, 4, "strict", 0.0),
    ("rgb-to-luma", 8, 6, 3, 1, 4, 3, 4, 3, "strict", 0.0),
]


def axis(size, patch, stride, edge):
    """Cells along one axis and the covered length (tilebench's rule)."""
    cells = (size - patch) // stride + 1
    rem = (size - patch) % stride
    if rem and edge == "pad":
        cells += 1
    if rem and edge == "strict":
        raise ValueError("strict edge with a remainder")
    return cells, (cells - 1) * stride + patch


def tokenize(frame, channels, pw, ph, sx, sy, edge, fill):
    h, w = frame.shape[:2]
    if frame.ndim == 2:
        frame = frame[:, :, None]
    if frame.shape[2] == 1 and channels == 3:
        vals = np.repeat(frame, 3, axis=2).astype(np.float32) / np.float32(255)
    elif frame.shape[2] == 3 and channels == 1:
        f = frame.astype(np.int64)
        y = 299 * f[:, :, 0] + 587 * f[:, :, 1] + 114 * f[:, :, 2]
        vals = (y.astype(np.float32) / np.float32(255000))[:, :, None]
    else:
        vals = frame.astype(np.float32) / np.float32(255)
    cols, out_w = axis(w, pw, sx, edge)
    rows, out_h = axis(h, ph, sy, edge)
    if out_w > w or out_h > h:
        vals = np.pad(vals, ((0, max(out_h - h, 0)), (0, max(out_w - w, 0)), (0, 0)),
                      constant_values=np.float32(fill))
    vals = vals[:out_h, :out_w, :]
    c = vals.shape[2]
    if sx == pw and sy == ph:
        t = vals.reshape(rows, ph, cols, pw, c).transpose(0, 2, 1, 3, 4)
    else:
        win = np.lib.stride_tricks.sliding_window_view(vals, (ph, pw, c))
        t = win[::sy, ::sx, 0]
    assert t.shape[:2] == (rows, cols)
    return np.ascontiguousarray(t).reshape(rows * cols, ph * pw * c).astype(np.float32)


def main():
    rng = np.random.default_rng(20260)
    out = {"format": 1, "source": "testdata/ref/tokenize_ref.py (NumPy " + np.__version__ + ")", "cases": []}
    for name, w, h, cin, c, pw, ph, sx, sy, edge, fill in CASES:
        shape = (h, w) if cin == 1 else (h, w, cin)
        frame = rng.integers(0, 256, size=shape, dtype=np.uint8)
        tok = tokenize(frame, c, pw, ph, sx, sy, edge, fill)
        out["cases"].append({
            "name": name, "width": w, "height": h, "frame_channels": cin, "channels": c,
            "patch_w": pw, "patch_h": ph, "stride_x": sx, "stride_y": sy,
            "edge": edge, "fill": fill,
            "frame": frame.reshape(-1).tolist(),
            "n": int(tok.shape[0]), "d": int(tok.shape[1]),
            # float32 bit patterns, so the comparison is exact
            "bits": tok.view(np.uint32).reshape(-1).tolist(),
        })
    json.dump(out, sys.stdout, separators=(",", ":"))
    sys.stdout.write("\n")


if __name__ == "__main__":
    main()
