#!/usr/bin/python3
"""Whole-pipeline speed: `tilebench stress` as a user runs it, against an
ad-hoc NumPy + PyTorch loop that does the same per-step work with no game.

(1) tilebench: `tilebench stress --game drive --policy
    testdata/policies/drive-attention-p8.safetensors --occlude random:0.3
    --scramble full --workers 1` as a whole process (built first with go
    build into a temporary folder), GOMAXPROCS=1. Its steps/s is the total
    of the "steps" of every episode in its results.jsonl over the wall time
    of the process, start to exit (so reading the weights, the baseline
    episodes, the analysis and the report all count against it).

(2) NumPy + PyTorch: on 112x80 RGB frames (uint8, random, drawn once),
    every step cuts the frame into 8x8 patches (140 tokens of 192 values,
    values b/255), occludes round-half-even(0.3*140) = 42 tokens drawn at
    random (filled black: all values 0), puts the tokens in the order of a
    random permutation (one per 250 steps, as the study draws one per
    episode and episodes last a few hundred steps) and runs the same
    set-attention network: the reference's own weights, loaded from the
    safetensors file into a torch module, sizes read from its metadata,
    batch 1, no gradients, torch.set_num_threads(1). The module's forward
    pass is checked once against testdata/ref/nets_ref.py's (the formulas
    the Go nets are tested against).

Rounds alternate (1) and (2) so that both see the same machine load. The
script prints every round, the medians and the ratio of the medians
(target: tilebench >= 2.5x the loop), by wall time and, steadier on a
shared machine, by CPU time (the process's user + system time; the
loop's time.process_time). Usage:

    /usr/bin/python3 testdata/ref/pipeline_speed.py [--rounds 5] [--steps 20000] [--json]

Only Debian packages: python3-numpy, python3-torch (and the Go toolchain).
"""
import argparse
import importlib.util
import json
import math
import os
import resource
import shutil
import statistics
import struct
import subprocess
import sys
import tempfile
import time

import numpy as np
import torch

ROOT = os.path.abspath(os.path.join(os.path.dirname(__file__), "..", ".."))
POLICY = os.path.join(ROOT, "testdata", "policies", "drive-attention-p8.safetensors")
STRESS = ["stress", "--game", "drive", "--policy", POLICY, "--occlude", "random:0.3",
          "--scramble", "full", "--workers", "1", "--json"]
OCCLUDE = 0.3
EPISODE_STEPS = 250


def read_safetensors(path):
    """Tensors (float32 numpy arrays) and metadata of a safetensors file
    (the open format: an 8-byte little-endian header length, a JSON header,
    then the raw little-endian data)."""
    with open(path, "rb") as f:
        b = f.read()
    n = struct.unpack("<Q", b[:8])[0]
    head = json.loads(b[8:8 + n])
    meta = head.pop("__metadata__", {})
    base = 8 + n
    tensors = {}
    for name, t in head.items():
        if t["dtype"] != "F32":
            sys.exit(f"{path}: tensor {name} is {t['dtype']}, want F32")
        s, e = t["data_offsets"]
        tensors[name] = np.frombuffer(b[base + s:base + e], dtype="<f4").reshape(t["shape"]).copy()
    return tensors, meta


def positional_encoding(rows, dim):
    """Vaswani et al. 2017, sec. 3.5, rounded to float32 once."""
    pe = torch.zeros(rows, dim, dtype=torch.float64)
    pos = torch.arange(rows, dtype=torch.float64).unsqueeze(1)
    i2 = torch.arange(0, dim, 2, dtype=torch.float64)
    ang = pos / torch.pow(10000.0, i2 / dim)
    pe[:, 0::2] = torch.sin(ang)
    pe[:, 1::2] = torch.cos(ang)
    return pe.float()


class SetAttention(torch.nn.Module):
    """The set-attention family of docs/families.md (linear keys and
    values, a fixed bank of positional-encoding queries times a learned
    projection, softmax(Q K^T / sqrt(dk)) V, tanh, a tanh hidden layer and
    tanh onto the action bounds), with centring: the set's mean token is
    subtracted from every token first. Weights are stored [in, out]."""

    def __init__(self, w, meta):
        super().__init__()
        if meta.get("family") != "attention" or meta.get("value") != "linear" or int(meta.get("key_hidden", 0)) != 0 \
                or int(meta.get("context", 1)) != 1 or meta.get("prev_action") == "true":
            sys.exit("this script times the plain set-attention family (linear keys and values, no context, no previous action)")
        self.centre = meta.get("centre") == "true"
        self.dk = int(meta["key_size"])
        t = {k: torch.from_numpy(v) for k, v in w.items()}
        self.wk, self.bk = t["key.weight"], t["key.bias"]
        self.wv, self.bv = t["value.weight"], t["value.bias"]
        self.w1, self.b1 = t["head.hidden.weight"], t["head.hidden.bias"]
        self.w2, self.b2 = t["head.out.weight"], t["head.out.bias"]
        self.q = positional_encoding(int(meta["queries"]), int(meta["query_dim"])) @ t["query.proj"]
        lo = torch.tensor(json.loads(meta["action_low"]), dtype=torch.float32)
        hi = torch.tensor(json.loads(meta["action_high"]), dtype=torch.float32)
        self.mid, self.amp = (hi + lo) / 2, (hi - lo) / 2
        self.scale = 1 / math.sqrt(self.dk)

    def forward(self, x):
        if self.centre:
            x = x - x.mean(dim=0)
        k = torch.addmm(self.bk, x, self.wk)
        v = torch.addmm(self.bv, x, self.wv)
        p = torch.softmax((self.q @ k.t()) * self.scale, dim=-1)
        o = torch.tanh(p @ v).reshape(1, -1)
        h = torch.tanh(torch.addmm(self.b1, o, self.w1))
        y = torch.tanh(torch.addmm(self.b2, h, self.w2))
        return self.mid + self.amp * y


def check_against_nets_ref(net, w, meta, n, d):
    """The module against testdata/ref/nets_ref.py's forward pass (float64,
    the formulas the Go families are tested against) on one random set."""
    spec = importlib.util.spec_from_file_location("nets_ref", os.path.join(ROOT, "testdata", "ref", "nets_ref.py"))
    ref = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(ref)
    torch.set_default_dtype(torch.float32)  # nets_ref sets float64 on import
    ref.D = d  # its token width (the grid of its own cases) is a module constant
    cfg = ref.config(key_size=int(meta["key_size"]), value="linear", value_size=int(meta["value_size"]),
                     queries=int(meta["queries"]), query_dim=int(meta["query_dim"]), hidden=int(meta["hidden"]),
                     centre=meta.get("centre") == "true")
    names = json.loads(meta["action_names"])
    action = {"kind": "continuous", "names": names, "low": json.loads(meta["action_low"]),
              "high": json.loads(meta["action_high"])}
    x = np.random.default_rng(3).random((n, d), dtype=np.float32)
    t = {k: torch.from_numpy(v).double() for k, v in w.items()}
    want = ref.forward_seq(cfg, action, t, [{"tokens": torch.from_numpy(x).double(), "pos": [[0, 0]] * n, "prev": []}])[0]
    with torch.no_grad():
        got = net(torch.from_numpy(x))[0].tolist()
    err = max(abs(a - b) for a, b in zip(got, want))
    if err > 1e-4:
        sys.exit(f"torch module {got} differs from nets_ref.py {want} by {err:.2e}")
    return err


def loop_round(net, frames, ph, pw, steps, seed):
    """Steps per second of wall time and of CPU time of the NumPy +
    PyTorch loop over steps steps."""
    rng = np.random.default_rng(seed)
    h, w, _ = frames[0].shape
    rows, cols = h // ph, w // pw
    n, d = rows * cols, ph * pw * 3
    k = int(round(OCCLUDE * n))  # Python rounds half to even, as the pipeline does
    perm = rng.permutation(n)
    sink = 0.0
    with torch.no_grad():
        t0, c0 = time.perf_counter(), time.process_time()
        for s in range(steps):
            if s % EPISODE_STEPS == 0:
                perm = rng.permutation(n)
            f = frames[s % len(frames)]
            x = f.reshape(rows, ph, cols, pw, 3).transpose(0, 2, 1, 3, 4).reshape(n, d).astype(np.float32)
            x *= np.float32(1 / 255)
            x[rng.permutation(n)[:k]] = 0
            x = x[perm]
            a = net(torch.from_numpy(x))
            sink += float(a[0, 0])
        dt, cpu = time.perf_counter() - t0, time.process_time() - c0
    return steps / dt, steps / cpu, sink


def stress_round(binary, out):
    """Steps/s of one whole tilebench stress process, and its CPU time."""
    shutil.rmtree(out, ignore_errors=True)
    env = dict(os.environ, GOMAXPROCS="1")
    c0 = resource.getrusage(resource.RUSAGE_CHILDREN)
    t0 = time.perf_counter()
    subprocess.run([binary] + STRESS + ["--out", out], env=env, check=True, stdout=subprocess.DEVNULL, cwd=ROOT)
    wall = time.perf_counter() - t0
    c1 = resource.getrusage(resource.RUSAGE_CHILDREN)
    steps = 0
    with open(os.path.join(out, "results.jsonl")) as f:
        for line in f:
            steps += json.loads(line)["steps"]
    cpu = (c1.ru_utime - c0.ru_utime) + (c1.ru_stime - c0.ru_stime)
    return steps / wall, steps, wall, cpu


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--rounds", type=int, default=5)
    ap.add_argument("--steps", type=int, default=20000, help="steps of the NumPy + PyTorch loop per round")
    ap.add_argument("--json", action="store_true")
    args = ap.parse_args()
    torch.set_num_threads(1)
    w, meta = read_safetensors(POLICY)
    ph, pw = int(meta["patch_h"]), int(meta["patch_w"])
    fw, fh = int(meta["frame_width"]), int(meta["frame_height"])
    n, d = (fh // ph) * (fw // pw), ph * pw * 3
    net = SetAttention(w, meta)
    err = check_against_nets_ref(net, w, meta, n, d)
    frames = [np.random.default_rng(10 + i).integers(0, 256, (fh, fw, 3), dtype=np.uint8) for i in range(16)]
    rounds = []
    with tempfile.TemporaryDirectory() as tmp:
        binary = os.path.join(tmp, "tilebench")
        subprocess.run(["go", "build", "-o", binary, "./cmd/tilebench"], cwd=ROOT, check=True)
        loop_round(net, frames, ph, pw, 500, 0)  # warm-up
        for r in range(args.rounds):
            go_sps, steps, wall, cpu = stress_round(binary, os.path.join(tmp, "study"))
            py_sps, py_cpu_sps, _ = loop_round(net, frames, ph, pw, args.steps, 100 + r)
            rounds.append({"tilebench_steps_per_s": go_sps, "tilebench_steps": steps, "tilebench_wall_s": wall,
                           "tilebench_cpu_s": cpu, "tilebench_steps_per_cpu_s": steps / cpu,
                           "loop_steps_per_s": py_sps, "loop_steps_per_cpu_s": py_cpu_sps,
                           "ratio": go_sps / py_sps, "cpu_ratio": (steps / cpu) / py_cpu_sps})
            if not args.json:
                print(f"round {r + 1}: tilebench stress {go_sps:6.0f} steps/s ({steps} steps, {wall:.2f} s wall, "
                      f"{cpu:.2f} s CPU)  numpy+torch {py_sps:6.0f} steps/s  ratio {go_sps / py_sps:.2f}  "
                      f"(per CPU second: {steps / cpu:.0f} vs {py_cpu_sps:.0f}, ratio {(steps / cpu) / py_cpu_sps:.2f})",
                      flush=True)
    go_med = statistics.median(r["tilebench_steps_per_s"] for r in rounds)
    py_med = statistics.median(r["loop_steps_per_s"] for r in rounds)
    go_cpu = statistics.median(r["tilebench_steps_per_cpu_s"] for r in rounds)
    py_cpu = statistics.median(r["loop_steps_per_cpu_s"] for r in rounds)
    summary = {
        "format": 1,
        "command": "tilebench " + " ".join(STRESS).replace(ROOT + os.sep, ""),
        "torch": torch.__version__, "numpy": np.__version__,
        "tokens": n, "token_values": d, "module_vs_nets_ref_max_error": err,
        "median_tilebench_steps_per_s": go_med, "median_loop_steps_per_s": py_med,
        "ratio_of_medians": go_med / py_med,
        "median_ratio": statistics.median(r["ratio"] for r in rounds),
        "median_tilebench_steps_per_cpu_s": go_cpu, "median_loop_steps_per_cpu_s": py_cpu,
        "cpu_ratio_of_medians": go_cpu / py_cpu,
        "target_ratio": 2.5, "rounds": rounds,
    }
    if args.json:
        print(json.dumps(summary, indent=1))
    else:
        print(f"medians: tilebench stress {go_med:.0f} steps/s, numpy+torch {py_med:.0f} steps/s; "
              f"ratio {go_med / py_med:.2f} (median of rounds {summary['median_ratio']:.2f}; target >= 2.5); "
              f"per CPU second {go_cpu:.0f} vs {py_cpu:.0f}, ratio {go_cpu / py_cpu:.2f}")


if __name__ == "__main__":
    main()
