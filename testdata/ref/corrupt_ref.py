#!/usr/bin/python3
"""Reference frame corruptions for tilebench's patch package (SciPy ndimage, scikit-image).

Prints, as JSON, small test frames and what SciPy's ndimage and
scikit-image make of them for Gaussian blur, down-scale-and-back
(resolution), rotation and zoom about the centre, and a straight motion
blur. The Go test (patch/corrupt_ref_test.go) runs tilebench's kernels on
the same frames and compares.

    /usr/bin/python3 testdata/ref/corrupt_ref.py > patch/testdata/corrupt_golden.json
    /usr/bin/python3 testdata/ref/corrupt_ref.py --photo patch/testdata/photo.png

The second form writes the photograph the severity test uses: scikit-image's
data.chelsea() (a public-domain photograph shipped with scikit-image),
centre-cropped to a square and reduced to 96x96 with skimage.transform.resize
(anti-aliased), as an 8-bit RGB PNG written with the standard library.

Conventions (tilebench's): frames are H x W x 3 uint8; outputs float in byte
units (0..255); pixel centres at integer coordinates, the frame centre at
((W-1)/2, (H-1)/2). Needs Debian's python3-numpy, python3-scipy, python3-skimage.
"""
import json
import struct
import sys
import zlib

import numpy as np
from scipy import ndimage
import skimage.data
import skimage.transform


def photo(size):
    img = skimage.data.chelsea()  # 300 x 451 x 3
    h, w = img.shape[:2]
    s = min(h, w)
    y0, x0 = (h - s) // 2, (w - s) // 2
    crop = img[y0:y0 + s, x0:x0 + s]
    out = skimage.transform.resize(crop, (size, size), order=1, anti_aliasing=True, preserve_range=True)
    return np.clip(np.round(out), 0, 255).astype(np.uint8)


def write_png(path, img):
    h, w, _ = img.shape
    raw = b"".join(b"\x00" + img[y].tobytes() for y in range(h))

    def chunk(kind, data):
        c = struct.pack(">I", len(data)) + kind + data
        return c + struct.pack(">I", zlib.crc32(kind + data) & 0xFFFFFFFF)

    png = b"\x89PNG\r\n\x1a\n" + chunk(b"IHDR", struct.pack(">IIBBBBB", w, h, 8, 2, 0, 0, 0))
    png += chunk(b"IDAT", zlib.compress(raw, 9)) + chunk(b"IEND", b"")
    with open(path, "wb") as f:
        f.write(png)


def blur_reflect(f, sigma):
    # SciPy's usual Gaussian filter, truncated at 3 sigma as imaging is
    # (radius int(3*sigma + 0.5) = ceil(3*sigma) for the sigmas used here).
    return ndimage.gaussian_filter(f, sigma=(sigma, sigma, 0), truncate=3.0, mode="reflect")


def blur_renorm(f, sigma):
    # The same kernel renormalised over the taps inside the frame
    # (normalised convolution: zero padding divided by the filtered ones).
    num = ndimage.gaussian_filter(f, sigma=(sigma, sigma, 0), truncate=3.0, mode="constant", cval=0.0)
    den = ndimage.gaussian_filter(np.ones_like(f), sigma=(sigma, sigma, 0), truncate=3.0, mode="constant", cval=0.0)
    return num / den


def resolution(f, k):
    # Down by the whole factor k: block means; back up: bilinear with
    # half-pixel centres and edge clamping.
    h, w, _ = f.shape
    small = skimage.transform.downscale_local_mean(f, (k, k, 1))
    return skimage.transform.resize(small, (h, w, 3), order=1, mode="edge", anti_aliasing=False, preserve_range=True)


def affine(f, deg, s, fill):
    # Output pixel (row y, col x) samples the input at
    # R(theta)(p - c)/s + c with R = [[cos, -sin], [sin, cos]] in (x, y):
    # in (row, col) order the matrix is [[cos, sin], [-sin, cos]] / s.
    h, w, _ = f.shape
    t = np.deg2rad(deg)
    m = np.array([[np.cos(t), np.sin(t)], [-np.sin(t), np.cos(t)]]) / s
    c = np.array([(h - 1) / 2, (w - 1) / 2])
    off = c - m @ c
    out = np.empty_like(f)
    for ch in range(3):
        out[..., ch] = ndimage.affine_transform(f[..., ch], m, offset=off, order=1,
                                                mode="grid-constant", cval=fill, prefilter=False)
    return out


def motion(f, length, axis):
    return ndimage.uniform_filter1d(f, size=length, axis=axis, mode="nearest")


def main():
    if len(sys.argv) == 3 and sys.argv[1] == "--photo":
        write_png(sys.argv[2], photo(96))
        return
    rng = np.random.default_rng(20261202)
    frames = {
        # A random frame of odd size: every edge rule shows.
        "noise": rng.integers(0, 256, size=(29, 37, 3), dtype=np.uint8),
        # A 48 x 40 piece of the photograph: smooth regions and edges.
        "photo": photo(96)[20:60, 30:78],
    }
    cases = []

    def add(name, frame, op, params, out, interior=0):
        cases.append({"name": name, "frame": frame, "op": op, "params": params, "interior": interior,
                      "out": [round(float(v), 2) for v in out.reshape(-1)]})

    for fname, fr in frames.items():
        f = fr.astype(np.float64)
        for sigma in (1.0, 2.0):
            r = int(np.ceil(3 * sigma))
            add(f"{fname} blur {sigma} reflect", fname, "blur", [sigma], blur_reflect(f, sigma), interior=r)
            add(f"{fname} blur {sigma} renormalised", fname, "blur", [sigma], blur_renorm(f, sigma))
        for deg in (3.0, -7.0):
            add(f"{fname} rotate {deg}", fname, "rotate", [deg], affine(f, deg, 1.0, 0.0))
        for s in (0.9, 1.25):
            add(f"{fname} scale {s}", fname, "scale", [s], affine(f, 0.0, s, 0.0))
        add(f"{fname} motionblur 5 at 0", fname, "motionblur", [5, 0], motion(f, 5, 1))
        add(f"{fname} motionblur 3 at 90", fname, "motionblur", [3, 90], motion(f, 3, 0))
    pf = frames["photo"].astype(np.float64)
    for k in (2, 4):
        add(f"photo resolution 1/{k}", "photo", "resolution", [1 / k], resolution(pf, k))
    out = {
        "format": 1,
        "frames": {k: {"width": v.shape[1], "height": v.shape[0], "rgb": [int(x) for x in v.reshape(-1)]} for k, v in frames.items()},
        "cases": cases,
    }
    json.dump(out, sys.stdout, separators=(",", ":"))
    sys.stdout.write("\n")


if __name__ == "__main__":
    main()
