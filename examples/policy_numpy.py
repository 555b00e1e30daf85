#!/usr/bin/env python3
"""A tilebench policy with NumPy: where to start your own.

The observation arrives as a NumPy array: a frame (height, width, channels)
or, with obs "tokens", the token set (n, patch_h, patch_w, channels) and
each token's grid cell (n, 2). Replace `Policy.hand` with your model (a
PyTorch or JAX forward pass); the protocol (docs/policy-protocol.md) is
handled by python/tilebench_protocol.py.

As shipped it plays the paddle game with the same hand rule as
policy_stdlib.py: slide the paddle towards the ball's height. On recorded frames
("tilebench probe", game "recording") it answers with a plain rule of
the picture's brightness: how much brighter the left half is than the
right, and the top than the bottom (a choice: the brightest vertical
stripe). Both rules keep no state, so it offers batches ("batch": 64 in
ready, docs/policy-protocol.md): a batch message carries up to 64 frames
and is answered in one reply, computed on all frames at once.

    tilebench probe --in frames.npy --action-space continuous:2 \
        --policy 'exec:python3 examples/policy_numpy.py' --scramble none,full --out probe

    tilebench play --game paddle --policy 'exec:python3 examples/policy_numpy.py'

Or serve it over TCP (say, on a machine with an accelerator), one session
per connection, and point tilebench at it:

    python3 examples/policy_numpy.py --listen 127.0.0.1:7000
    tilebench play --game paddle --policy tcp://127.0.0.1:7000

Logs go to stderr; stdout carries protocol messages only.
"""
import argparse
import os
import sys

import numpy as np

try:
    import tilebench_protocol as tp
except ImportError:  # not installed: use the copy in this repository
    sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "python"))
    import tilebench_protocol as tp

TRACK_X0, TRACK_X1 = 98, 118  # the columns of the paddle's track in the 120x80 field
RAIL = 3  # rows of rail at the top and the bottom


def log(*args):
    print("policy_numpy:", *args, file=sys.stderr)


class Decoder:
    """Observations as arrays with values scaled to [0, 1]."""

    def __init__(self, session):
        tk = session.grid
        self.frame_shape = session.frame_shape
        self.patch = (tk["patch"][0], tk["patch"][1], tk["channels"])
        self.stride = tuple(tk["stride"])
        self.rows, self.cols = tk["rows"], tk["cols"]

    def decode(self, obs):
        """Returns (frame, tokens, cells); with obs tokens the frame is
        rebuilt from the tokens."""
        if obs.session.obs == "frame":
            return obs.pixels(), None, None
        tokens = obs.tokens.astype(np.float32)
        if obs.session.dtype == "uint8":
            tokens = tokens / 255
        cells = obs.cells
        # Put each token back in its cell (what a position-aware model
        # would see); a set model would use `tokens` as they come.
        frame = np.zeros(self.frame_shape)
        ph, pw, _ = self.patch
        for tok, (r, c) in zip(tokens, cells):
            if r < 0:
                continue  # a noise token: no cell
            y, x = r * self.stride[0], c * self.stride[1]
            frame[y:y + ph, x:x + pw] = tok[: self.frame_shape[0] - y, : self.frame_shape[1] - x]
        return frame, tokens, cells

    def weights(self, frame, tokens):
        """Optional weights for the action reply: how many bright pixels
        (what the hand rule looks for) each token holds, per token as sent
        (obs tokens) or per cell of the frame, row after row (obs frame)."""
        if tokens is not None:
            bright = np.all(tokens >= 200 / 255, axis=3)
            return bright.reshape(len(tokens), -1).sum(axis=1).astype(float).tolist()
        ph, pw, _ = self.patch
        sy, sx = self.stride
        bright = np.all(frame >= 200 / 255, axis=2)
        out = []
        for r in range(self.rows):
            for c in range(self.cols):
                out.append(float(bright[r * sy:r * sy + ph, c * sx:c * sx + pw].sum()))
        return out


def brightness_rule(frames, action):
    """The rule for recorded frames, on a (k, h, w, c) uint8 array: one
    action per frame, from every 8th pixel in each direction. Sums are
    exact integers, so a frame gets the same action alone or in a batch."""
    k, h, w, c = frames.shape
    x = frames[:, ::8, ::8].astype(np.int32)  # a small copy: fast sums
    rows = x.sum(axis=(2, 3))  # (k, h/8)
    cols = x.sum(axis=(1, 3))  # (k, w/8)
    if action["kind"] == "discrete":
        n = len(action["names"])
        cut = max(1, cols.shape[1] // n)
        stripes = np.stack([cols[:, i * cut:(i + 1) * cut].sum(axis=1) for i in range(n)], axis=1)
        return [[int(v)] for v in np.argmax(stripes, axis=1)]
    hw, hh = cols.shape[1] // 2, rows.shape[1] // 2
    lr = (cols[:, :hw].sum(axis=1) - cols[:, hw:2 * hw].sum(axis=1)) / (255.0 * max(1, hw * rows.shape[1] * c))
    tb = (rows[:, :hh].sum(axis=1) - rows[:, hh:2 * hh].sum(axis=1)) / (255.0 * max(1, hh * cols.shape[1] * c))
    lo, hi, dim = action["low"], action["high"], action["dim"]
    out = []
    for i in range(k):
        a = ([4.0 * float(lr[i]), 4.0 * float(tb[i])] + [0.0] * dim)[:dim]
        out.append([min(max(v, lo[j]), hi[j]) for j, v in enumerate(a)])
    return out


class Policy:
    """The hand rule (paddle) or the brightness rule (recorded frames);
    neither keeps state, so it takes batches."""

    def setup(self, session):
        self.recording = session.game == "recording"
        if not self.recording and (session.game != "paddle" or session.frame_shape[2] != 3
                                   or session.frame_shape[1] < TRACK_X1 or session.frame_shape[0] <= 2 * RAIL):
            return "the hand rule needs the paddle game in RGB"
        self.action = session.action
        self.decoder = Decoder(session)
        return {"name": "numpy brightness rule" if self.recording else "numpy hand rule"}

    def end(self, header):
        log("episode", header.get("episode"), "return", header.get("return"))

    def act(self, batch):
        """The actions for a list of observations (one for a step
        message, which also gets the weights)."""
        s = batch[0].session
        if self.recording and s.obs == "frame" and s.dtype == "uint8":
            return brightness_rule(np.stack([o.frame for o in batch]), self.action)
        decoded = [self.decoder.decode(o) for o in batch]
        if self.recording:
            raw = np.stack([np.rint(f * 255).astype(np.uint8) for f, _, _ in decoded])
            return brightness_rule(raw, self.action)
        out = [self.hand(f, o.prev) for (f, _, _), o in zip(decoded, batch)]
        if len(batch) == 1:
            frame, tokens, _ = decoded[0]
            return [{"action": out[0], "weights": self.decoder.weights(frame, tokens)}]
        return out

    def hand(self, frame, prev):
        bright = np.all(frame >= 200 / 255, axis=2)
        ys, xs = np.nonzero(bright)
        band = frame[RAIL:frame.shape[0] - RAIL, TRACK_X0:TRACK_X1]
        far = np.abs(band - np.median(band, axis=0)).sum(axis=2) > 90 / 255
        far &= ~np.all(band >= 200 / 255, axis=2)
        if len(ys) == 0 or not far.any():
            move = 0.0
        else:
            gap = ys.mean() - (RAIL + np.nonzero(far)[0].mean())
            move = 0.0 if abs(gap) <= 2 else float(np.clip(gap / 4.0, -1, 1))
        if self.action["kind"] == "discrete":
            return [int(np.sign(move)) + 1]
        lo, hi = self.action["low"][0], self.action["high"][0]
        return [float(np.clip(move, lo, hi))] + [0.0] * (self.action["dim"] - 1)


def main(argv):
    ap = argparse.ArgumentParser(description="tilebench policy with NumPy (docs/policy-protocol.md)")
    ap.add_argument("--batch", type=int, default=64, help="observations per batch message offered in ready (0: none)")
    ap.add_argument("--listen", metavar="HOST:PORT", help="serve over TCP, one session per connection")
    ap.add_argument("--sessions", type=int, default=0, help="with --listen: stop after N sessions (0: never)")
    args = ap.parse_args(argv)
    # The rules are stateless: with --batch 0 they are still called with
    # lists, one observation at a time.
    return tp.serve(Policy(), batch=args.batch if args.batch > 1 else 1, listen=args.listen, sessions=args.sessions)


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
