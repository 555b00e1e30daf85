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


class BrightnessRule:
    """The rule for recorded frames: how much brighter the left half of
    the picture is than the right, and the top than the bottom (for a
    discrete action: the brightest vertical stripe), from every 8th pixel
    in each direction. Called on a (k, h, w, c) uint8 array it returns a
    (k, dim) array of actions, computed on all k frames at once with one
    matrix product. Its sums are of whole numbers below 2**53, exact in
    float64 in any order, and the rest is elementwise, so a frame gets the
    same action alone or in a batch."""

    def __init__(self, frame_shape, action):
        h, w, c = frame_shape
        hs, ws = len(range(0, h, 8)), len(range(0, w, 8))
        iy, ix = np.meshgrid(np.arange(hs), np.arange(ws), indexing="ij")
        iy, ix = np.repeat(iy.reshape(-1), c), np.repeat(ix.reshape(-1), c)  # per sampled value
        self.discrete = action["kind"] == "discrete"
        if self.discrete:
            n = len(action["names"])
            cut = max(1, ws // n)
            self.weights = np.stack([(ix >= i * cut) & (ix < (i + 1) * cut) for i in range(n)], axis=1).astype(np.float64)
            return
        hw, hh = ws // 2, hs // 2
        sign = lambda i, half: np.where(i < half, 1.0, np.where(i < 2 * half, -1.0, 0.0))  # noqa: E731
        self.weights = np.stack([sign(ix, hw), sign(iy, hh)], axis=1)
        self.scale = np.array([255.0 * max(1, hw * hs * c), 255.0 * max(1, hh * ws * c)])
        self.dim = action["dim"]
        self.low, self.high = np.array(action["low"], dtype=np.float64), np.array(action["high"], dtype=np.float64)

    def __call__(self, frames):
        k = len(frames)
        x = frames[:, ::8, ::8].astype(np.float64).reshape(k, -1)  # a small copy
        sums = x @ self.weights
        if self.discrete:
            return sums.argmax(axis=1).reshape(k, 1)
        a = 4.0 * (sums / self.scale)
        if self.dim != 2:
            a = np.concatenate([a, np.zeros((k, max(0, self.dim - 2)))], axis=1)[:, :self.dim]
        return np.minimum(np.maximum(a, self.low), self.high)


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
        self.rule = BrightnessRule(session.frame_shape, session.action) if self.recording else None
        return {"name": "numpy brightness rule" if self.recording else "numpy hand rule"}

    def end(self, header):
        log("episode", header.get("episode"), "return", header.get("return"))

    def act(self, batch):
        """The actions for a list of observations (one for a step
        message, which also gets the weights)."""
        s = batch[0].session
        if self.recording and s.obs == "frame" and s.dtype == "uint8":
            # A Batch's frames: the message's frames as one array, no copy.
            frames = batch.frames if isinstance(batch, tp.Batch) else np.stack([o.frame for o in batch])
            return self.rule(frames)
        decoded = [self.decoder.decode(o) for o in batch]
        if self.recording:
            raw = np.stack([np.rint(f * 255).astype(np.uint8) for f, _, _ in decoded])
            return self.rule(raw)
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
