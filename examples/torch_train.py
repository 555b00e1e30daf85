#!/usr/bin/env python3
"""Behaviour cloning of a small patch-based PyTorch policy on recordings
made with "tilebench record" (docs/recording.md), on the CPU.

The model is this example's own: each frame is cut into P×P patches, a
linear map (a convolution with kernel and stride P) turns every patch into
a token, a learned position code is added, one transformer encoder layer
mixes the tokens and one attention-pooling query reads them out; a small
MLP gives the action (continuous: squashed into the game's bounds;
discrete: logits). Everything the model needs to know about the game
(frame size, action kind, dimension, bounds) comes from the recording's
manifest, so it trains on any game tilebench records.

    tilebench record --game drive --episodes 30 --out demos/
    python3 examples/torch_train.py --data demos/ --out drive.pt --time-limit 120
    tilebench play --game drive --policy 'exec:python3 examples/policy_torch.py --model drive.pt'

Several --data folders (say, expert demonstrations and a relabelled run
of the trained policy, "tilebench record --policy ... --relabel") are
trained on together; a folder with labels.npy trains on the expert's
labels, not on the actions taken.
"""
import argparse
import math
import os
import sys
import time

import numpy as np
import torch
from torch import nn

try:
    import tilebench_protocol as tp
except ImportError:  # not installed: use the copy in this repository
    sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "python"))
    import tilebench_protocol as tp


class PatchPolicy(nn.Module):
    """Patches -> tokens -> token MLP -> attention pooling -> action."""

    def __init__(self, frame_shape, patch, action, stack=2, dim=32, queries=4):
        super().__init__()
        h, w, c = frame_shape
        self.frame_shape, self.patch, self.action, self.stack = tuple(frame_shape), patch, action, stack
        self.pad = (0, (-w) % patch, 0, (-h) % patch)  # right, bottom, for F.pad
        n = math.ceil(h / patch) * math.ceil(w / patch)
        self.embed = nn.Conv2d(c * stack, dim, patch, stride=patch)
        self.pos = nn.Parameter(torch.randn(1, n, dim) * 0.02)
        self.mix = nn.Sequential(nn.LayerNorm(dim), nn.Linear(dim, 2 * dim), nn.GELU(), nn.Linear(2 * dim, dim))
        self.score = nn.Linear(dim, queries)  # one attention-pooling query per column
        self.discrete = action["kind"] == "discrete"
        out = len(action["names"]) if self.discrete else action["dim"]
        self.head = nn.Sequential(nn.LayerNorm(queries * dim), nn.Linear(queries * dim, 64), nn.GELU(), nn.Linear(64, out))
        if self.discrete:
            low, high = [0.0], [len(action["names"]) - 1.0]
        else:
            low, high = action["low"], action["high"]
        self.register_buffer("low", torch.tensor(low, dtype=torch.float32))
        self.register_buffer("high", torch.tensor(high, dtype=torch.float32))

    def scale(self, actions):
        """Game actions to [-1, 1] per dimension (the model's units)."""
        return (2 * (actions - self.low) / (self.high - self.low).clamp(min=1e-6) - 1).clamp(-1, 1)

    def forward(self, frames, before=None):
        """frames: (B, H, W, C) float in [0, 1]; before: the frames of the
        step before (stack 2; the same frames at an episode's start).
        Returns logits (discrete) or actions in [-1, 1] per dimension
        (continuous; see to_action)."""
        if self.stack == 2:
            # The change since the last frame shows motion (speed), which
            # one frame cannot.
            frames = torch.cat([frames, frames - before], dim=3)
        x = nn.functional.pad(frames.permute(0, 3, 1, 2), self.pad)
        tokens = self.embed(x).flatten(2).transpose(1, 2) + self.pos
        tokens = tokens + self.mix(tokens)
        weights = self.score(tokens).softmax(dim=1)  # (B, N, Q): where each query looks
        pooled = torch.einsum("bnq,bnd->bqd", weights, tokens).flatten(1)
        out = self.head(pooled)
        return out if self.discrete else torch.tanh(out)

    def to_action(self, out):
        """The game's actions for forward's output."""
        if self.discrete:
            return out.argmax(dim=1, keepdim=True)
        return self.low + (out + 1) / 2 * (self.high - self.low)

    def config(self):
        return {"frame_shape": list(self.frame_shape), "patch": self.patch, "action": self.action, "stack": self.stack}


def load(folders):
    """Frames and targets of every folder, checked to be one game."""
    frames, befores, targets, first, rows = [], [], [], None, 0
    for d in folders:
        rec = tp.load_recording(d)
        m = rec["manifest"]
        if m["obs"] != "frame":
            raise SystemExit("%s: recorded %s; this example trains on frames (record with --obs frame)" % (d, m["obs"]))
        key = (m["game"], tuple(m["frame"]), m["action"]["kind"], m["action"]["dim"])
        if first is not None and key != first[0]:
            raise SystemExit("%s: %s, but %s was %s" % (d, key, folders[0], first[0]))
        first = first or (key, m)
        frames.append(rec["frames"])
        # Row of the frame before each step: the step itself at an
        # episode's start.
        idx = np.arange(len(rec["frames"]))
        befores.append(rows + np.where(rec["episode_starts"], idx, idx - 1))
        rows += len(rec["frames"])
        targets.append(rec["labels"] if "labels" in rec else rec["actions"])
    return np.concatenate(frames), np.concatenate(befores), np.concatenate(targets), first[1]


def main(argv):
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--data", action="append", required=True, help="a recording folder (several allowed)")
    ap.add_argument("--out", required=True, help="where to save the model (.pt)")
    ap.add_argument("--patch", type=int, default=12, help="patch size in pixels (frames are padded to a multiple)")
    ap.add_argument("--epochs", type=int, default=30)
    ap.add_argument("--time-limit", type=float, default=170, help="stop after this many seconds of training")
    ap.add_argument("--batch", type=int, default=64)
    ap.add_argument("--lr", type=float, default=2e-3)
    ap.add_argument("--threads", type=int, default=1, help="torch threads (on a busy machine 1 is often fastest)")
    ap.add_argument("--seed", type=int, default=0)
    ap.add_argument("--init", help="start from this model (.pt) instead of fresh weights")
    ap.add_argument("--stack", type=int, choices=(1, 2), default=2,
                    help="frames the model sees: 2 (this one and its change since the last, which shows speed) or 1 (stateless: served in batches)")
    args = ap.parse_args(argv)
    torch.manual_seed(args.seed)
    torch.set_num_threads(args.threads)
    frames, befores, targets, m = load(args.data)
    action = m["action"]
    model = PatchPolicy(m["frame"], args.patch, action, stack=args.stack)
    if args.init:
        ck = torch.load(args.init, map_location="cpu")
        if ck["config"] != model.config():
            raise SystemExit("--init %s: a model of %s, this data wants %s" % (args.init, ck["config"], model.config()))
        model.load_state_dict(ck["state"])
    if action["kind"] == "discrete":
        y = torch.from_numpy(targets[:, 0].astype(np.int64))
        counts = torch.bincount(y, minlength=len(action["names"])).float()
        loss_fn = nn.CrossEntropyLoss(weight=counts.sum() / counts.clamp(min=1) / len(counts))
    else:
        low, high = np.array(action["low"], np.float32), np.array(action["high"], np.float32)
        y = torch.from_numpy(np.clip(2 * (targets - low) / (high - low) - 1, -1, 1).astype(np.float32))
        # Absolute error: the expert's throttle and brake are mostly at
        # their bounds, and the median of such labels keeps that decision
        # where the mean would blur it. Each dimension weighs by the
        # inverse of its spread, so that one the expert moves little
        # (steering) counts as much as one it moves a lot (common practice).
        w = 1 / y.std(dim=0).clamp(min=0.03)
        w = w / w.sum()

        def loss_fn(out, target):
            return ((out - target).abs() * w).sum(dim=1).mean()
    opt = torch.optim.Adam(model.parameters(), lr=args.lr)
    steps = args.epochs * math.ceil(len(frames) / args.batch)
    rng = np.random.default_rng(args.seed)
    start, done = time.monotonic(), 0
    print("torch_train: %d frames %s, %s actions, %d parameters" % (
        len(frames), tuple(m["frame"]), action["kind"], sum(p.numel() for p in model.parameters())), file=sys.stderr)
    for epoch in range(args.epochs):
        order, total, n = rng.permutation(len(frames)), 0.0, 0
        for i in range(0, len(order), args.batch):
            idx = np.sort(order[i:i + args.batch])
            x = torch.from_numpy(frames[idx]).float() / 255
            before = torch.from_numpy(frames[befores[idx]]).float() / 255 if args.stack == 2 else None
            loss = loss_fn(model(x, before), y[idx])
            opt.zero_grad()
            loss.backward()
            # Cosine decay over whichever ends first, the epochs or the
            # time limit (common practice).
            frac = min(1.0, max(done / steps, (time.monotonic() - start) / args.time_limit))
            for g in opt.param_groups:
                g["lr"] = args.lr * 0.5 * (1 + math.cos(math.pi * frac))
            opt.step()
            done += 1
            total, n = total + float(loss) * len(idx), n + len(idx)
            if time.monotonic() - start > args.time_limit:
                break
        print("torch_train: epoch %d loss %.4f (%.0f s)" % (epoch + 1, total / n, time.monotonic() - start), file=sys.stderr)
        if time.monotonic() - start > args.time_limit:
            print("torch_train: time limit reached after %d batches" % done, file=sys.stderr)
            break
    tmp = args.out + ".tmp"
    torch.save({"format": 1, "game": m["game"], "config": model.config(), "state": model.state_dict()}, tmp)
    os.replace(tmp, args.out)
    print("torch_train: saved %s" % args.out, file=sys.stderr)
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
