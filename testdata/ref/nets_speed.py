#!/usr/bin/python3
"""Side-by-side speed of the default set-attention policy: tilebench's Go
benchmark BenchmarkAttentionActDefault (vision/nets) against the same
network in PyTorch eager mode on the CPU with one thread.

The network: 112x80x3 frames at patch 8 -> 140 tokens of 192 values; linear
key 192->16 and linear value 192->16 on every token; a fixed bank of 16
query rows (sinusoidal positional encoding, Vaswani et al. 2017, sec. 3.5,
width 16) times a learned 16x16 projection; softmax(Q K^T / sqrt(16)) V;
tanh; head Linear(256->32), tanh, Linear(32->3), tanh and the affine map
onto the action bounds. Batch 1, one core, no gradients.

Rounds alternate Go and torch so that both see the same machine load; the
ratio of each round is Go time / torch time, and the script prints every
round and the median ratio. Usage:

    /usr/bin/python3 testdata/ref/nets_speed.py [--rounds 11] [--steps 3000] [--json]

Only Debian packages: python3-torch (and the Go toolchain for the
benchmark).
"""
import argparse
import json
import math
import os
import re
import statistics
import subprocess
import sys
import tempfile
import time

import torch

ROOT = os.path.abspath(os.path.join(os.path.dirname(__file__), "..", ".."))
N, D, DK, DV, M, PQ, H, A = 140, 192, 16, 16, 16, 16, 32, 3


def positional_encoding(rows, dim):
    pe = torch.zeros(rows, dim)
    pos = torch.arange(rows, dtype=torch.float64).unsqueeze(1)
    i2 = torch.arange(0, dim, 2, dtype=torch.float64)
    ang = pos / torch.pow(10000.0, i2 / dim)
    pe[:, 0::2] = torch.sin(ang).float()
    pe[:, 1::2] = torch.cos(ang).float()
    return pe


def make_net():
    g = torch.Generator().manual_seed(1)

    def u(*shape, fan):
        b = 1 / math.sqrt(fan)
        return (torch.rand(*shape, generator=g) * 2 - 1) * b

    w = {
        "wk": u(D, DK, fan=D), "bk": u(DK, fan=D),
        "wv": u(D, DV, fan=D), "bv": u(DV, fan=D),
        "wq": u(PQ, DK, fan=PQ),
        "w1": u(M * DV, H, fan=M * DV), "b1": u(H, fan=M * DV),
        "w2": u(H, A, fan=H), "b2": u(A, fan=H),
    }
    pe = positional_encoding(M, PQ)
    low = torch.tensor([-1.0, -0.5, 0.0])
    high = torch.tensor([1.0, 0.5, 2.0])
    mid, amp = (high + low) / 2, (high - low) / 2
    scale = 1 / math.sqrt(DK)

    def act(x):
        k = torch.addmm(w["bk"], x, w["wk"])
        v = torch.addmm(w["bv"], x, w["wv"])
        q = pe @ w["wq"]
        p = torch.softmax((q @ k.t()) * scale, dim=-1)
        o = torch.tanh(p @ v).reshape(1, -1)
        h = torch.tanh(torch.addmm(w["b1"], o, w["w1"]))
        y = torch.tanh(torch.addmm(w["b2"], h, w["w2"]))
        return mid + amp * y

    return act


def time_torch(act, x, steps):
    with torch.no_grad():
        for _ in range(200):
            act(x)
        t0 = time.perf_counter()
        for _ in range(steps):
            act(x)
        return (time.perf_counter() - t0) / steps * 1e9


def time_go(binary, steps):
    env = dict(os.environ, GOMAXPROCS="1")
    out = subprocess.run(
        [binary, "-test.run", "^$", "-test.bench", "^BenchmarkAttentionActDefault$",
         "-test.benchtime", f"{steps}x", "-test.cpu", "1", "-test.benchmem"],
        cwd=os.path.join(ROOT, "vision", "nets"), env=env, check=True,
        capture_output=True, text=True).stdout
    m = re.search(r"BenchmarkAttentionActDefault\S*\s+\d+\s+([\d.]+) ns/op(?:\s+(\d+) B/op\s+(\d+) allocs/op)?", out)
    if not m:
        sys.exit("could not read the Go benchmark output:\n" + out)
    return float(m.group(1)), int(m.group(3) or 0)


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--rounds", type=int, default=11)
    ap.add_argument("--steps", type=int, default=3000)
    ap.add_argument("--json", action="store_true")
    args = ap.parse_args()
    torch.set_num_threads(1)
    act = make_net()
    x = torch.rand(N, D, generator=torch.Generator().manual_seed(2))
    with tempfile.TemporaryDirectory() as tmp:
        binary = os.path.join(tmp, "nets.test")
        subprocess.run(["go", "test", "-c", "-o", binary, "./vision/nets"], cwd=ROOT, check=True)
        rounds = []
        for r in range(args.rounds):
            go_ns, allocs = time_go(binary, args.steps)
            torch_ns = time_torch(act, x, args.steps)
            rounds.append({"go_ns": go_ns, "torch_ns": torch_ns, "ratio": go_ns / torch_ns, "go_allocs": allocs})
            if not args.json:
                print(f"round {r + 1}: go {go_ns / 1000:8.1f} us  torch {torch_ns / 1000:8.1f} us  ratio {go_ns / torch_ns:.3f}  allocs/op {allocs}")
    med = statistics.median(r["ratio"] for r in rounds)
    summary = {
        "format": 1,
        "benchmark": "BenchmarkAttentionActDefault",
        "torch": torch.__version__,
        "median_go_ns": statistics.median(r["go_ns"] for r in rounds),
        "median_torch_ns": statistics.median(r["torch_ns"] for r in rounds),
        "median_ratio": med,
        "target_ratio": 0.5,
        "rounds": rounds,
    }
    if args.json:
        print(json.dumps(summary, indent=1))
    else:
        print(f"median ratio go/torch {med:.3f} (target <= 0.5)")


if __name__ == "__main__":
    main()
