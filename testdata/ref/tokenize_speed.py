#!/usr/bin/python3
"""Speed of tilebench's tokenizer against NumPy, measured in one run.

Runs the Go benchmarks BenchmarkTokenize... of package patch (96x96 RGB
frame, patch 8, float32 tokens, with the plain-copy baseline), then times
NumPy's reshape/transpose/astype path on a frame of the same size, and
prints the medians and the ratios:

    /usr/bin/python3 testdata/ref/tokenize_speed.py [-count 5]

Targets: Go tokenize >= 0.5x the copy baseline's bandwidth; Go >= 5x
faster than NumPy. Needs Debian's python3-numpy and the Go toolchain.
"""
import os
import re
import shutil
import statistics
import subprocess
import sys
import timeit

import numpy as np

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))


def go_bench(count):
    go = shutil.which("go") or "/usr/local/go/bin/go"
    cmd = [go, "test", "-run", "^$", "-bench", "BenchmarkTokenize", "-count", str(count), "./patch"]
    out = subprocess.run(cmd, cwd=ROOT, check=True, capture_output=True, text=True).stdout
    times = {}
    for m in re.finditer(r"^(BenchmarkTokenize\w+)-\d+\s+\d+\s+([\d.]+) ns/op", out, re.M):
        times.setdefault(m.group(1), []).append(float(m.group(2)))
    return {k: statistics.median(v) for k, v in times.items()}, out


def numpy_tokenize(frame, patch):
    h, w, c = frame.shape
    rows, cols = h // patch, w // patch
    return (frame.reshape(rows, patch, cols, patch, c)
            .transpose(0, 2, 1, 3, 4)
            .reshape(rows * cols, patch * patch * c)
            .astype(np.float32) / np.float32(255))


def numpy_bench(count):
    rng = np.random.default_rng(1)
    frame = rng.integers(0, 256, size=(96, 96, 3), dtype=np.uint8)
    tok = numpy_tokenize(frame, 8)
    assert tok.shape == (144, 192) and tok.dtype == np.float32
    timer = timeit.Timer(lambda: numpy_tokenize(frame, 8))
    n, _ = timer.autorange()
    runs = [t / n * 1e9 for t in timer.repeat(repeat=max(count, 5), number=n)]
    return statistics.median(runs)


def main():
    count = 5
    if len(sys.argv) == 3 and sys.argv[1] == "-count":
        count = int(sys.argv[2])
    go, raw = go_bench(count)
    npy = numpy_bench(count)
    tok, base = go.get("BenchmarkTokenizeRGBA"), go.get("BenchmarkTokenizeCopyBaseline")
    if tok is None or base is None:
        sys.stderr.write(raw)
        sys.exit("benchmarks BenchmarkTokenizeRGBA / BenchmarkTokenizeCopyBaseline not found")
    print("medians over %d runs (ns per 96x96x3 frame, patch 8, float32 tokens):" % count)
    for name in sorted(go):
        print("  go    %-32s %10.0f" % (name, go[name]))
    print("  numpy %-32s %10.0f" % ("reshape/transpose/astype", npy))
    print("ratio tokenize / copy bandwidth: %.3f (target >= 0.5)" % (base / tok))
    print("ratio numpy time / go time:      %.2f (target >= 5)" % (npy / tok))


if __name__ == "__main__":
    main()
