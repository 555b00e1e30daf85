#!/usr/bin/env python3
"""Serves a model trained by examples/torch_train.py to tilebench.

Over stdin/stdout, started by tilebench:

    tilebench play --game drive --policy 'exec:python3 examples/policy_torch.py --model drive.pt'
    tilebench stress --game drive --policy 'exec:python3 examples/policy_torch.py --model drive.pt' ...

or over TCP, one session per connection (say, on a machine with an
accelerator; this example runs on the CPU):

    python3 examples/policy_torch.py --model drive.pt --listen 127.0.0.1:7000
    tilebench play --game drive --policy tcp://127.0.0.1:7000

A model trained with --stack 1 keeps no state between frames, so it
offers batches (--batch, default 64): commands that have several
observations at once (probe) send them in one message and get them back
from one forward pass. A model of two frames (--stack 2, the default: the
frame and its change since the last step, which shows speed) keeps the
last frame and is sent steps one by one.

It refuses a session for another game, frame size or action space than
the model was trained on (run play with the grid the recording used).
Logs go to stderr; stdout carries protocol messages only.
"""
import argparse
import os
import sys

import numpy as np
import torch

try:
    import tilebench_protocol as tp
except ImportError:  # not installed: use the copy in this repository
    sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "python"))
    import tilebench_protocol as tp

from torch_train import PatchPolicy  # the model lives with its training code


class Served:
    def __init__(self, path):
        ck = torch.load(path, map_location="cpu")
        cfg = ck["config"]
        self.game = ck["game"]
        self.model = PatchPolicy(cfg["frame_shape"], cfg["patch"], cfg["action"], stack=cfg.get("stack", 1))
        self.last = None
        self.model.load_state_dict(ck["state"])
        self.model.eval()
        self.name = "torch patch policy %s (p%d)" % (os.path.basename(path), cfg["patch"])

    def setup(self, session):
        m = self.model
        want = (self.game, m.frame_shape, m.action["kind"], m.action["dim"])
        got = (session.game, session.frame_shape, session.action.get("kind"), session.action_dim)
        if session.obs != "frame":
            return "needs obs frame (the model reassembles no tokens)"
        if got != want:
            return "trained on %s %s %s:%d, this session is %s %s %s:%d" % (want + got)
        return None

    def start(self, seed):
        self.last = None  # a new episode: no frame before

    def act(self, batch):
        """A list of observations (stack 1, stateless, batched) or one
        (stack 2: it keeps the last frame)."""
        s = batch[0].session
        if isinstance(batch, tp.Batch) and s.obs == "frame" and s.dtype == "uint8":
            # The message's frames as one array, not stacked one by one.
            x = torch.from_numpy(batch.frames.astype(np.float32) / 255)
        else:
            x = torch.from_numpy(np.stack([o.pixels() for o in batch]).astype(np.float32))
        before = None
        if self.model.stack == 2:
            before = x if self.last is None else self.last
            self.last = x
        with torch.no_grad():
            a = self.model.to_action(self.model(x, before))
        return a.numpy().tolist()


def main(argv):
    ap = argparse.ArgumentParser(description="serve a torch_train.py model over the tilebench protocol")
    ap.add_argument("--model", required=True, help="the .pt file torch_train.py saved")
    ap.add_argument("--batch", type=int, default=64, help="observations per batch message offered (1: none)")
    ap.add_argument("--listen", metavar="HOST:PORT", help="serve over TCP, one session per connection")
    ap.add_argument("--sessions", type=int, default=0, help="with --listen: stop after N sessions (0: never)")
    ap.add_argument("--threads", type=int, default=1)
    args = ap.parse_args(argv)
    torch.set_num_threads(args.threads)
    served = Served(args.model)
    # A model of two frames keeps the last one: state, so no batches.
    batch = max(1, args.batch) if served.model.stack == 1 else 1
    return tp.serve(served, batch=batch, name=served.name, listen=args.listen, sessions=args.sessions)


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
