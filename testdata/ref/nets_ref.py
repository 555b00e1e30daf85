#!/usr/bin/python3
"""Golden forward passes of tilebench's policy families, computed with
PyTorch (Debian python3-torch) in float64 from the formulas:

  * sinusoidal positional encoding, Vaswani et al. 2017, sec. 3.5:
    PE(p, 2i) = sin(p / 10000^(2i/d)), PE(p, 2i+1) = cos(p / 10000^(2i/d));
  * scaled dot-product attention, Vaswani et al. 2017, sec. 3.2.1:
    softmax(Q K^T / sqrt(d)) V;
  * Deep Sets mean pooling, Zaheer et al. 2017;

with the tensor names, shapes and layout of docs/families.md (linear
weights stored [in, out]: y = x W + b). Weights and inputs are drawn here
from torch's generator, stored as float32 values, and written out beside
the outputs, so that the Go test loads the same weights and inputs (numpy only shortens the
float32 decimals in the file).

Usage: /usr/bin/python3 testdata/ref/nets_ref.py > testdata/ref/nets_ref.json
"""
import json
import math
import sys

import numpy
import torch

torch.set_default_dtype(torch.float64)
GEN = torch.Generator().manual_seed(20171206)

# Grid: 24x16 frames, 3 channels, patch 4 -> 6 columns x 4 rows = 24 tokens of 48.
GRID = {"width": 24, "height": 16, "patch": 4}
COLS, ROWS, D = 6, 4, 48

CONT = {"kind": "continuous", "names": ["yaw", "reach", "grip"], "low": [-1.0, 0.0, 0.0], "high": [1.0, 1.0, 1.0]}
DISC = {"kind": "discrete", "names": ["left", "stay", "right", "wait"]}


def f32(t):
    """Round to float32 values (kept in float64 for the computation)."""
    return t.float().double()


def uniform(shape, bound):
    return f32((torch.rand(*shape, generator=GEN) * 2 - 1) * bound)


def pos_enc(rows, dim):
    pe = torch.zeros(rows, dim)
    for p in range(rows):
        for j in range(dim):
            i2 = j - j % 2
            ang = p / (10000 ** (i2 / dim))
            pe[p, j] = math.sin(ang) if j % 2 == 0 else math.cos(ang)
    return f32(pe)  # tilebench rounds the encoding to float32 once


def out_dim(action):
    return len(action["names"])


def prev_width(cfg, action):
    if not cfg["prev_action"]:
        return 0
    return len(action["names"])


def make_tensors(cfg, action):
    """Names and shapes as docs/families.md lists them, in file order."""
    t = {}
    k = cfg["context"]
    din = D * k + prev_width(cfg, action)
    px = D * k

    def lin(name, i, o):
        t[name + ".weight"] = uniform((i, o), 1 / math.sqrt(i))
        t[name + ".bias"] = uniform((o,), 1 / math.sqrt(i))

    fam = cfg["family"]
    if fam in ("attention", "posattention"):
        kin = din
        if cfg["key_hidden"] > 0:
            lin("key.hidden", din, cfg["key_hidden"])
            kin = cfg["key_hidden"]
        lin("key", kin, cfg["key_size"])
        dv = px
        if cfg["value"] == "linear":
            lin("value", px, cfg["value_size"])
            dv = cfg["value_size"]
        t["query.proj"] = uniform((cfg["query_dim"], cfg["key_size"]), 1 / math.sqrt(cfg["query_dim"]))
        if fam == "posattention":
            t["pos.embed"] = uniform((COLS * ROWS, cfg["key_size"]), 0.5)
        lin("head.hidden", cfg["queries"] * dv, cfg["hidden"])
    elif fam == "meanpool":
        lin("token", din, cfg["token_hidden"])
        lin("head.hidden", cfg["token_hidden"], cfg["hidden"])
    lin("head.out", cfg["hidden"], out_dim(action))
    # Larger weights than the default initialisation so that the softmax
    # is far from uniform and the tanh layers leave their linear range.
    for name in t:
        t[name] = f32(t[name] * 3)
    return t


def make_inputs(cfg, action, steps, drop=0, noise=0):
    seq = []
    for s in range(steps):
        cells = list(range(COLS * ROWS))
        perm = torch.randperm(len(cells), generator=GEN).tolist()
        cells = [cells[i] for i in perm][: len(cells) - drop]
        pos = [[c // COLS, c % COLS] for c in cells] + [[-1, -1]] * noise
        tokens = f32(torch.rand(len(pos), D, generator=GEN))
        if action["kind"] == "discrete":
            prev = [float(torch.randint(0, len(action["names"]), (1,), generator=GEN).item())]
        else:
            prev = f32(torch.rand(len(action["names"]), generator=GEN) * 2 - 1).tolist()
        seq.append({"tokens": tokens, "pos": pos, "prev": prev})
    return seq


def forward_seq(cfg, action, t, seq):
    k = cfg["context"]
    past = []  # past[j] = {cell: token} for the step j+1 steps back
    outs = []
    for step in seq:
        x, pos = step["tokens"], step["pos"]
        n = x.shape[0]
        cellof = [r * COLS + c if r >= 0 else -1 for r, c in pos]
        rows = []
        for i in range(n):
            parts = [x[i]]
            for j in range(k - 1):
                frame = past[j] if j < len(past) else {}
                c = cellof[i]
                parts.append(frame.get(c, torch.zeros(D)) if c >= 0 else torch.zeros(D))
            if cfg["prev_action"]:
                if action["kind"] == "discrete":
                    oh = torch.zeros(len(action["names"]))
                    oh[int(step["prev"][0])] = 1
                    parts.append(oh)
                else:
                    parts.append(torch.tensor(step["prev"]))
            rows.append(torch.cat(parts))
        X = torch.stack(rows)
        px = D * k
        if cfg["centre"]:
            # The set's mean row is subtracted from every row's pixel part.
            X = torch.cat([X[:, :px] - X[:, :px].mean(dim=0), X[:, px:]], dim=1)
        if k > 1:
            frame = {}
            for i in range(n):
                if cellof[i] >= 0:
                    frame[cellof[i]] = x[i]
            past = [frame] + past[: k - 2]
        fam = cfg["family"]
        if fam in ("attention", "posattention"):
            h = X
            if cfg["key_hidden"] > 0:
                h = torch.tanh(X @ t["key.hidden.weight"] + t["key.hidden.bias"])
            K = h @ t["key.weight"] + t["key.bias"]
            if fam == "posattention":
                for i in range(n):
                    if cellof[i] >= 0:
                        K[i] = K[i] + t["pos.embed"][cellof[i]]
            V = X[:, :px]
            if cfg["value"] == "linear":
                V = V @ t["value.weight"] + t["value.bias"]
            Q = pos_enc(cfg["queries"], cfg["query_dim"]) @ t["query.proj"]
            P = torch.softmax(Q @ K.t() / math.sqrt(cfg["key_size"]), dim=-1)
            feat = torch.tanh(P @ V).reshape(-1)
        else:
            feat = torch.tanh(X @ t["token.weight"] + t["token.bias"]).mean(dim=0)
        hid = torch.tanh(feat @ t["head.hidden.weight"] + t["head.hidden.bias"])
        y = hid @ t["head.out.weight"] + t["head.out.bias"]
        if action["kind"] == "continuous":
            lo, hi = torch.tensor(action["low"]), torch.tensor(action["high"])
            y = (hi + lo) / 2 + (hi - lo) / 2 * torch.tanh(y)
        outs.append(y.tolist())
    return outs


def config(**kw):
    c = {"family": "attention", "key_size": 0, "key_hidden": 0, "value": "", "value_size": 0, "queries": 0,
         "query_dim": 0, "hidden": 0, "token_hidden": 0, "prev_action": False, "context": 1,
         "centre": False}
    c.update(kw)
    return c


CASES = [
    ("attention", config(key_size=8, value="linear", value_size=5, queries=6, query_dim=8, hidden=10), CONT, 2, 0, 0),
    ("attention-keyhidden-identity-prev", config(key_size=8, key_hidden=7, value="identity", queries=4, query_dim=6,
                                                 hidden=9, prev_action=True), DISC, 2, 3, 0),
    ("attention-context3", config(key_size=6, value="linear", value_size=4, queries=5, query_dim=4, hidden=8,
                                  context=3), CONT, 4, 2, 1),
    ("posattention-dropped-noise", config(family="posattention", key_size=8, value="linear", value_size=5, queries=6,
                                          query_dim=8, hidden=10, prev_action=True), CONT, 2, 4, 2),
    ("meanpool-prev", config(family="meanpool", hidden=10, token_hidden=12, prev_action=True), DISC, 2, 0, 0),
    ("meanpool-context2-dropped", config(family="meanpool", hidden=8, token_hidden=9, context=2), CONT, 3, 5, 1),
    # Cases added later go last, so that the ones above keep their inputs.
    ("attention-centre-context2-dropped", config(key_size=6, value="linear", value_size=4, queries=5, query_dim=4,
                                                 hidden=8, context=2, prev_action=True, centre=True), DISC, 3, 4, 1),
    ("posattention-centre", config(family="posattention", key_size=8, value="identity", queries=4, query_dim=6,
                                   hidden=9, centre=True), CONT, 2, 0, 0),
    ("meanpool-centre", config(family="meanpool", hidden=8, token_hidden=9, centre=True), CONT, 2, 3, 0),
]


def short(values):
    """float32 values as the shortest decimals that read back as the same
    float32 (numpy's float32 repr), to keep the golden file small."""
    return [float(repr(numpy.float32(v)).replace("np.float32(", "").rstrip(")")) for v in values]


def main():
    cases = []
    for name, cfg, action, steps, drop, noise in CASES:
        t = make_tensors(cfg, action)
        seq = make_inputs(cfg, action, steps, drop, noise)
        outs = forward_seq(cfg, action, t, seq)
        cases.append({
            "name": name, "config": cfg, "grid": GRID, "action": action,
            "tensors": [{"name": k, "shape": list(v.shape), "data": short(v.reshape(-1).tolist())} for k, v in t.items()],
            "steps": [{"tokens": short(s["tokens"].reshape(-1).tolist()), "pos": s["pos"], "prev": s["prev"]} for s in seq],
            "outputs": outs,
        })
    json.dump({"format": 1, "source": "testdata/ref/nets_ref.py, torch " + torch.__version__ + ", float64",
               "cases": cases}, sys.stdout, separators=(",", ":"))
    sys.stdout.write("\n")


if __name__ == "__main__":
    main()
