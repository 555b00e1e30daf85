#!/usr/bin/env python3
"""A tilebench policy in plain Python 3 (standard library only).

It plays the paddle game from the pixels it is shown with a hand rule:
find the ball (the pixels that are bright in all three channels), find the
paddle (the pixels in the columns of its curved track that stand out from
their column's usual colour), and slide the paddle towards the ball's
height.

Run it through tilebench, which starts it and speaks the protocol
(docs/policy-protocol.md) over its stdin and stdout:

    tilebench play --game paddle --policy 'exec:python3 examples/policy_stdlib.py'

Options:
    --lead N      aim N pixels ahead of the ball's motion (default 0)
    --deadzone D  stay when the paddle is within D pixels of the ball's height (default 2)

Without --lead the rule keeps no state from frame to frame, so it offers
batches of up to 32 frames in one message ("batch" in ready; see
docs/policy-protocol.md, "Batches").

The protocol itself is handled by python/tilebench_protocol.py (standard
library only), found next to this repository's examples or installed with
pip install --no-build-isolation ./python.

Logs go to stderr; stdout carries protocol messages only.
"""
import os
import sys

try:
    import tilebench_protocol as tp
except ImportError:  # not installed: use the copy in this repository
    sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "python"))
    import tilebench_protocol as tp

TRACK_X0, TRACK_X1 = 98, 118  # the columns of the paddle's track in the 120x80 field
RAIL = 3  # rows of rail at the top and the bottom


def log(*args):
    print("policy_stdlib:", *args, file=sys.stderr)


# Bytes >= 200 become 1, others 0: the ball is bright in every channel.
BRIGHT = bytes(1 if b >= 200 else 0 for b in range(256))


class HandRule:
    def __init__(self, lead, deadzone):
        self.lead = lead
        self.deadzone = deadzone
        self.last_ball = None

    def setup(self, session):
        """Called at hello: refuse what the rule cannot read."""
        h = session.hello
        if session.game != "paddle" or session.obs != "frame" or session.dtype != "uint8" \
                or h["frame"][2] != 3 or h["frame"][1] < TRACK_X1 or h["frame"][0] <= 2 * RAIL:
            return "needs the paddle game as uint8 RGB frames, got %s %s %s %s" % (
                session.game, session.obs, session.dtype, h["frame"])
        self.h, self.w, self.c = h["frame"]
        self.action = session.action
        self.tokens = session.grid
        return None

    def start(self, seed):
        self.reset()

    def end(self, header):
        log("episode", header.get("episode"), "return", header.get("return"))

    def reset(self):
        self.last_ball = None

    def ball_y(self, frame):
        """Mean y of the pixels bright in all channels (and their mean x
        in self.ball_x)."""
        mask = frame.translate(BRIGHT)
        xs = []
        self.ball_x = None
        ys = []
        i = mask.find(b"\x01\x01\x01")
        while i >= 0:
            if i % 3 == 0:
                xs.append((i // 3) % self.w)
                ys.append((i // 3) // self.w)
                i = mask.find(b"\x01\x01\x01", i + 3)
            else:
                i = mask.find(b"\x01\x01\x01", i + 1)
        if not xs:
            return None
        self.ball_x = sum(xs) / len(xs)
        return sum(ys) / len(ys)

    def weights(self, ball, paddle):
        """Optional per-cell weights for the action reply: what the rule
        looked at (the ball's cell and the paddle's), one per cell of the
        frame, row after row."""
        tk = self.tokens
        rows, cols = tk["rows"], tk["cols"]
        sy, sx = tk["stride"]
        w = [0.0] * (rows * cols)

        def mark(x, y, v):
            r, c = min(int(y) // sy, rows - 1), min(int(x) // sx, cols - 1)
            w[r * cols + c] += v
        if ball is not None:
            mark(self.ball_x, ball, 1.0)
        if paddle is not None:
            mark(self.paddle_x, paddle, 0.5)
        return w

    def paddle_y(self, frame):
        """Centre of the pixels between the rails, in the track's columns,
        far from their column's median and not bright in every channel
        (the ball); its mean x in self.paddle_x."""
        xs, ys = [], []
        n = self.h - 2 * RAIL
        for x in range(TRACK_X0, min(TRACK_X1, self.w)):
            pixels = [frame[3 * (y * self.w + x):3 * (y * self.w + x) + 3] for y in range(RAIL, self.h - RAIL)]
            med = [sorted(p[k] for p in pixels)[n // 2] for k in range(3)]
            for i, p in enumerate(pixels):
                if min(p) < 200 and abs(p[0] - med[0]) + abs(p[1] - med[1]) + abs(p[2] - med[2]) > 90:
                    xs.append(x)
                    ys.append(RAIL + i)
        self.paddle_x = sum(xs) / len(xs) if xs else None
        if not ys:
            return None
        return sum(ys) / len(ys)

    def act(self, frame):
        ball = self.ball_y(frame)
        paddle = self.paddle_y(frame)
        target = ball
        if ball is not None and self.last_ball is not None:
            target = ball + self.lead * (ball - self.last_ball)
        self.last_ball = ball
        self.last_weights = self.weights(ball, paddle)
        if target is None or paddle is None:
            move = 0.0
        else:
            gap = target - paddle
            move = 0.0 if abs(gap) <= self.deadzone else max(-1.0, min(1.0, gap / 4.0))
        if self.action["kind"] == "discrete":
            # up / stay / down
            return [0 if move < 0 else (2 if move > 0 else 1)]
        lo, hi = self.action["low"][0], self.action["high"][0]
        return [max(lo, min(hi, move))] + [0.0] * (self.action["dim"] - 1)


def main(argv):
    lead, deadzone = 0.0, 2.0
    args = list(argv)
    while args:
        a = args.pop(0)
        if a == "--lead" and args:
            lead = float(args.pop(0))
        elif a == "--deadzone" and args:
            deadzone = float(args.pop(0))
        else:
            log("unknown argument", a)
            return 2
    rule = HandRule(lead, deadzone)
    if lead:
        # Leading uses the last ball position: state, so no batches.
        return tp.serve(rule, name="stdlib hand rule")

    class Stateless:
        """The rule without lead keeps no state: it takes batches."""
        setup, start, end = rule.setup, rule.start, rule.end

        @staticmethod
        def act(batch):
            out = [rule.act(o.raw) for o in batch]
            if len(batch) == 1:
                return [{"action": out[0], "weights": rule.last_weights}]
            return out
    return tp.serve(Stateless(), batch=32, name="stdlib hand rule")


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
