#!/usr/bin/python3
"""Speed of tilebench's tokenizer against NumPy, measured in one run.

Runs the Go benchmarks BenchmarkTokenize... of package patch (96x96 RGB
frame, patch 8, float32 tokens, with the plain-copy baseline) and times
NumPy's reshape/transpose/astype path on a frame of the same size, in
alternating rounds, and prints the medians and the ratios:

    /usr/bin/python3 testdata/ref/tokenize_speed.py [-count 5]

It then also times single frames (Go: TestSpeedMedians with
TILEBENCH_SPEED=1; NumPy: time.perf_counter_ns per call) and prints their
medians, which a busy shared machine disturbs less than benchmark means.

Targets: Go tokenize >= 0.5x the copy baseline's bandwidth; Go >= 5x
faster than NumPy. Needs Debian's python3-numpy and the Go toolchain.
"""
import os
import re
import shutil
import statistics
import subprocess
import sys
import time
import timeit

import numpy as np

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))


def go_bench(pattern, benchtime="0.5s"):
    """One run of the Go benchmarks matching pattern: {name: ns/op}."""
    go = shutil.which("go") or "/usr/local/go/bin/go"
    cmd = [go, "test", "-run", "^$", "-bench", pattern, "-benchtime", benchtime, "-count", "1", "./patch"]
    out = subprocess.run(cmd, cwd=ROOT, check=True, capture_output=True, text=True).stdout
    times = {}
    for m in re.finditer(r"^(Benchmark\w+)-\d+\s+\d+\s+([\d.]+) ns/op", out, re.M):
        times[m.group(1)] = float(m.group(2))
    return times, out


def go_frame_medians():
    """Median single-frame times from the Go test TestSpeedMedians."""
    go = shutil.which("go") or "/usr/local/go/bin/go"
    cmd = [go, "test", "-count", "1", "-run", "^TestSpeedMedians$", "-v", "./patch"]
    env = dict(os.environ, TILEBENCH_SPEED="1")
    out = subprocess.run(cmd, cwd=ROOT, check=True, capture_output=True, text=True, env=env).stdout
    m = re.search(r"speed: tokenize_ns=(\d+) copy_ns=(\d+)", out)
    if not m:
        sys.stderr.write(out)
        sys.exit("TestSpeedMedians printed no speed line")
    return float(m.group(1)), float(m.group(2))


def numpy_frame_median(frame, n=4001):
    """Median time of single NumPy calls (ns)."""
    times = []
    for _ in range(n):
        t0 = time.perf_counter_ns()
        numpy_tokenize(frame, 8)
        times.append(time.perf_counter_ns() - t0)
    return statistics.median(times)


def numpy_tokenize(frame, patch):
    h, w, c = frame.shape
    rows, cols = h // patch, w // patch
    return (frame.reshape(rows, patch, cols, patch, c)
            .transpose(0, 2, 1, 3, 4)
            .reshape(rows * cols, patch * patch * c)
            .astype(np.float32) / np.float32(255))


def numpy_bench(frame):
    """NumPy's time for one frame (ns), best estimate of one timing round."""
    timer = timeit.Timer(lambda: numpy_tokenize(frame, 8))
    n, _ = timer.autorange()
    return statistics.median(t / n * 1e9 for t in timer.repeat(repeat=3, number=n))


def main():
    count = 5
    if len(sys.argv) == 3 and sys.argv[1] == "-count":
        count = int(sys.argv[2])
    rng = np.random.default_rng(1)
    frame = rng.integers(0, 256, size=(96, 96, 3), dtype=np.uint8)
    tok = numpy_tokenize(frame, 8)
    assert tok.shape == (144, 192) and tok.dtype == np.float32
    # Rounds pair a Go run with a NumPy timing taken right after it, so a
    # busy machine slows both alike; the ratios are medians over rounds.
    rounds = []
    for _ in range(count):
        go, raw = go_bench("BenchmarkTokenize")
        if "BenchmarkTokenizeRGBA" not in go or "BenchmarkTokenizeCopyBaseline" not in go:
            sys.stderr.write(raw)
            sys.exit("benchmarks BenchmarkTokenizeRGBA / BenchmarkTokenizeCopyBaseline not found")
        go["numpy"] = numpy_bench(frame)
        rounds.append(go)
    med = {k: statistics.median(r[k] for r in rounds) for k in rounds[0]}
    print("medians over %d rounds (ns per 96x96x3 frame, patch 8, float32 tokens):" % count)
    for name in sorted(k for k in med if k != "numpy"):
        print("  go    %-32s %10.0f" % (name, med[name]))
    print("  numpy %-32s %10.0f" % ("reshape/transpose/astype", med["numpy"]))
    copy_ratio = statistics.median(r["BenchmarkTokenizeCopyBaseline"] / r["BenchmarkTokenizeRGBA"] for r in rounds)
    numpy_ratio = statistics.median(r["numpy"] / r["BenchmarkTokenizeRGBA"] for r in rounds)
    print("ratio tokenize / copy bandwidth: %.3f (target >= 0.5; median of per-round ratios)" % copy_ratio)
    print("ratio numpy time / go time:      %.2f (target >= 5; median of per-round ratios)" % numpy_ratio)
    # Single-frame medians, steadier on a busy machine than benchmark means.
    tok_ns, copy_ns = go_frame_medians()
    np_ns = numpy_frame_median(frame)
    print("single-frame medians: go tokenize %.0f ns, go copy %.0f ns, numpy %.0f ns" % (tok_ns, copy_ns, np_ns))
    print("  copy / tokenize: %.3f   numpy / go: %.2f" % (copy_ns / tok_ns, np_ns / tok_ns))


if __name__ == "__main__":
    main()
