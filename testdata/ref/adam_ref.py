#!/usr/bin/python3
"""Golden values for tilebench's Adam optimiser (vision/train).

Runs torch.optim.Adam (Debian python3-torch; Kingma & Ba 2015) on a fixed
quadratic f(x) = 0.5 * sum_i a_i * (x_i - c_i)^2 whose gradient is
a_i * (x_i - c_i), in float32, and prints the parameters after each step as
JSON. Two cases: plain Adam, and Adam with (coupled, L2) weight decay as
torch.optim.Adam defines it (grad += weight_decay * param).

Usage: adam_ref.py > vision/train/testdata/adam_golden.json
"""
import json
import sys

import torch


def run(lr, weight_decay, steps):
    a = torch.tensor([1.0, 2.0, 0.5, 10.0, 0.1], dtype=torch.float32)
    c = torch.tensor([0.5, -1.0, 2.0, 0.0, -3.0], dtype=torch.float32)
    x = torch.tensor([0.0, 1.0, -1.0, 0.3, 4.0], dtype=torch.float32, requires_grad=True)
    opt = torch.optim.Adam([x], lr=lr, betas=(0.9, 0.999), eps=1e-8,
                           weight_decay=weight_decay)
    out = []
    for _ in range(steps):
        opt.zero_grad()
        loss = 0.5 * (a * (x - c) ** 2).sum()
        loss.backward()
        opt.step()
        out.append([float(v) for v in x.detach()])
    return {
        "lr": lr,
        "weight_decay": weight_decay,
        "a": [float(v) for v in a],
        "c": [float(v) for v in c],
        "x0": [0.0, 1.0, -1.0, 0.3, 4.0],
        "steps": out,
    }


def main():
    torch.set_num_threads(1)
    doc = {
        "format": 1,
        "source": "torch.optim.Adam, torch " + torch.__version__,
        "cases": [run(0.1, 0.0, 12), run(0.05, 0.01, 12)],
    }
    json.dump(doc, sys.stdout, indent=1)
    sys.stdout.write("\n")


if __name__ == "__main__":
    main()
