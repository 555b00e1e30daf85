#!/usr/bin/env python3
"""Where the Python side of a probe spends its time, per frame.

Feeds ``tilebench_protocol.serve_session`` the messages tilebench sends
when it probes N frames of H×W×3 (step messages one frame each, or batch
messages of B frames), from memory instead of a pipe, with the NumPy
example's policy, and prints the time per frame of the whole loop and of
its parts (header parse, payload read, the policy's compute, the reply).
Run: ``python3 python/bench_serve.py [--frames N] [--batch B] [--size 96x96]``.
"""
import argparse
import io
import json
import os
import sys
import time

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "examples"))
import tilebench_protocol as tp  # noqa: E402
import policy_numpy  # noqa: E402


def hello(w, h):
    return {"msg": "hello", "protocol": 1, "game": "recording", "obs": "frame", "dtype": "uint8",
            "frame": [h, w, 3], "tokens": {"rows": h // 8, "cols": w // 8, "patch": [8, 8], "stride": [8, 8],
                                           "channels": 3, "dim": 192, "max": (h // 8) * (w // 8)},
            "action": {"kind": "continuous", "names": ["a0", "a1"], "dim": 2, "low": [-1, -1], "high": [1, 1]}}


def stream(n, w, h, batch, seed=1):
    """The bytes tilebench sends: hello, start, the steps or batches, bye."""
    import numpy as np
    rng = np.random.default_rng(seed)
    fb = w * h * 3
    frames = rng.integers(0, 256, size=(min(n, 256), fb), dtype=np.uint8)
    out = [json.dumps(hello(w, h)).encode() + b"\n", b'{"msg":"start","episode":0,"seed":1}\n']
    t = 0
    while t < n:
        k = 1 if batch <= 1 else min(batch, n - t)
        pay = b"".join(frames[(t + i) % len(frames)].tobytes() for i in range(k))
        if batch <= 1:
            hdr = {"msg": "step", "t": t, "prev": [0, 0], "len": fb}
        else:
            hdr = {"msg": "batch", "count": k, "t": list(range(t, t + k)), "prev": [0] * (2 * k), "len": k * fb}
        out.append(json.dumps(hdr, separators=(",", ":")).encode() + b"\n" + pay)
        t += k
    out.append(b'{"msg":"bye"}\n')
    return b"".join(out)


def pipe_read(msg, k, n=None):
    """Per frame, reading msg from a pipe that another process fills as
    fast as it can: the copy out of the kernel (header line and payload),
    timed from the second message on (the writer's start left out)."""
    import subprocess
    n = n or max(20, 20000 // k)
    code = ("import sys; m = sys.stdin.buffer.read(); o = sys.stdout.buffer\n"
            "for _ in range(%d): o.write(m)\n" % (n + 1))
    pr = subprocess.Popen([sys.executable, "-c", code], stdin=subprocess.PIPE, stdout=subprocess.PIPE)
    pr.stdin.write(msg)
    pr.stdin.close()
    inp = pr.stdout
    line = inp.readline()
    inp.read(len(msg) - len(line))
    t0 = time.perf_counter()
    for _ in range(n):
        line = inp.readline()
        inp.read(len(msg) - len(line))
    dt = time.perf_counter() - t0
    pr.wait()
    return dt / n / k * 1e6


def parts(w, h, k):
    """Times, per frame, the parts of answering one message of k frames."""
    import timeit
    import numpy as np
    fb = w * h * 3
    s = tp.Session(hello(w, h))
    pol = policy_numpy.Policy()
    pol.setup(s)
    line = json.dumps({"msg": "batch", "count": k, "t": list(range(k)), "prev": [0] * (2 * k), "len": k * fb}
                      if k > 1 else {"msg": "step", "t": 0, "prev": [0, 0], "len": fb}, separators=(",", ":")).encode() + b"\n"
    payload = np.random.default_rng(1).integers(0, 256, size=k * fb, dtype=np.uint8).tobytes()
    src = line + payload
    batch = tp.Batch(s, [tp.Observation(s, i, [0, 0], payload, 0, i * fb, fb) for i in range(k)], payload)
    acts = pol.act(batch)
    reply = {"msg": "actions", "t": 0, "count": k, "action": tp._flat_actions(acts, k, s)}
    steps = [
        ("header parse (json)", lambda: json.loads(line)),
        ("observations and Batch", lambda: tp.Batch(s, [tp.Observation(s, i, [0, 0], payload, 0, i * fb, fb) for i in range(k)], payload)),
        ("frombuffer of the batch", lambda: batch.frames),
        ("policy compute", lambda: pol.act(batch)),
        ("reply (flatten, json)", lambda: tp.send(io.BytesIO(), dict(reply, action=tp._flat_actions(acts, k, s)))),
    ]
    total = min(pipe_read(src, k) for _ in range(5))  # the least disturbed of five
    print("batch %4d  %-26s %7.2f us/frame" % (k, "message read from a pipe", total))
    for name, f in steps:
        n = max(10, 20000 // k)
        best = min(timeit.repeat(f, number=n, repeat=5)) / n / k * 1e6
        total += best
        print("batch %4d  %-26s %7.2f us/frame" % (k, name, best))
    print("batch %4d  %-26s %7.2f us/frame" % (k, "sum of the parts", total))


def main(argv):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--frames", type=int, default=10000)
    ap.add_argument("--batch", type=int, default=64)
    ap.add_argument("--size", default="96x96")
    ap.add_argument("--repeat", type=int, default=5)
    ap.add_argument("--profile", action="store_true", help="print a cProfile of one run")
    ap.add_argument("--parts", action="store_true", help="time each part of answering one message alone")
    a = ap.parse_args(argv)
    w, h = (int(v) for v in a.size.split("x"))
    if a.parts:
        for b in sorted({1, a.batch}):
            parts(w, h, b)
        return 0
    for b in sorted({1, a.batch}):
        data = stream(a.frames, w, h, b)
        times = []
        for _ in range(a.repeat):
            inp, out = io.BufferedReader(io.BytesIO(data)), io.BytesIO()
            t0 = time.perf_counter()
            rc = tp.serve_session(policy_numpy.Policy(), inp, out, batch=b if b > 1 else 1)
            times.append(time.perf_counter() - t0)
            assert rc == 0, rc
        times.sort()
        med = times[len(times) // 2]
        print("batch %4d: %.2f us/frame over %d frames of %dx%dx3 (median of %d)" % (b, 1e6 * med / a.frames, a.frames, w, h, a.repeat))
        if a.profile:
            import cProfile
            import pstats
            inp, out = io.BufferedReader(io.BytesIO(data)), io.BytesIO()
            pr = cProfile.Profile()
            pr.runcall(tp.serve_session, policy_numpy.Policy(), inp, out, b if b > 1 else 1)
            pstats.Stats(pr).sort_stats("tottime").print_stats(12)
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
