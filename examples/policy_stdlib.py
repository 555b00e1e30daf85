#!/usr/bin/env python3
"""A tilebench policy in plain Python 3 (standard library only).

It plays the paddle game from the pixels it is shown with a hand rule:
find the ball (the pixels that are bright in all three channels), find the
paddle (the run of pixels on the paddle's row that stand out from that
row's usual colour), and move the paddle towards the ball.

Run it through tilebench, which starts it and speaks the protocol
(docs/policy-protocol.md) over its stdin and stdout:

    tilebench play --game paddle --policy 'exec:python3 examples/policy_stdlib.py'

Options:
    --lead N      aim N pixels ahead of the ball's motion (default 0)
    --deadzone D  stay when the paddle is within D pixels of the ball (default 2)

Without --lead the rule keeps no state from frame to frame, so it offers
batches of up to 32 frames in one message ("batch" in ready; see
docs/policy-protocol.md, "Batches").

Logs go to stderr; stdout carries protocol messages only.
"""
import json
import sys

PROTOCOL = 1
MAX_LINE = 65536
PADDLE_ROW = 76  # the paddle's row in the 84x84 paddle field


def log(*args):
    print("policy_stdlib:", *args, file=sys.stderr)


def read_message(inp):
    """One header line and its payload, or (None, None) at the end."""
    line = inp.readline(MAX_LINE + 1)
    if not line:
        return None, None
    if not line.endswith(b"\n"):
        raise ValueError("header line too long or cut off")
    header = json.loads(line)
    n = header.get("len", 0)
    payload = inp.read(n) if n else b""
    if len(payload) != n:
        raise EOFError("payload cut off")
    return header, payload


def send(out, message):
    out.write(json.dumps(message, separators=(",", ":")).encode("utf-8") + b"\n")
    out.flush()


# Bytes >= 200 become 1, others 0: the ball is bright in every channel.
BRIGHT = bytes(1 if b >= 200 else 0 for b in range(256))


class HandRule:
    def __init__(self, hello, lead, deadzone):
        self.h, self.w, self.c = hello["frame"]
        self.action = hello["action"]
        self.tokens = hello["tokens"]
        self.lead = lead
        self.deadzone = deadzone
        self.last_ball = None

    def reset(self):
        self.last_ball = None

    def ball_x(self, frame):
        """Mean x of the pixels bright in all channels above the paddle."""
        mask = frame[: PADDLE_ROW * self.w * 3].translate(BRIGHT)
        xs = []
        self.ball_y = None
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
        self.ball_y = sum(ys) / len(ys)
        return sum(xs) / len(xs)

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
            mark(ball, self.ball_y, 1.0)
        if paddle is not None:
            mark(paddle, PADDLE_ROW, 0.5)
        return w

    def paddle_x(self, frame):
        """Centre of the pixels on the paddle row far from the row's median."""
        row = frame[PADDLE_ROW * self.w * 3:(PADDLE_ROW + 1) * self.w * 3]
        pixels = [row[3 * x:3 * x + 3] for x in range(self.w)]
        med = [sorted(p[k] for p in pixels)[self.w // 2] for k in range(3)]
        xs = [x for x, p in enumerate(pixels)
              if abs(p[0] - med[0]) + abs(p[1] - med[1]) + abs(p[2] - med[2]) > 90]
        if not xs:
            return None
        return sum(xs) / len(xs)

    def act(self, frame):
        ball = self.ball_x(frame)
        paddle = self.paddle_x(frame)
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
            # left / stay / right
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
    inp, out = sys.stdin.buffer, sys.stdout.buffer
    hello, _ = read_message(inp)
    if hello is None or hello.get("msg") != "hello":
        log("no hello")
        return 1
    if hello.get("protocol") != PROTOCOL:
        send(out, {"msg": "refuse", "reason": "speaks protocol %d only" % PROTOCOL})
        return 0
    if hello["game"] != "paddle" or hello["obs"] != "frame" or hello["dtype"] != "uint8" \
            or hello["frame"][2] != 3 or hello["frame"][1] < PADDLE_ROW or hello["frame"][0] <= PADDLE_ROW:
        send(out, {"msg": "refuse",
                   "reason": "needs the paddle game as uint8 RGB frames, got %s %s %s %s" % (
                       hello["game"], hello["obs"], hello["dtype"], hello["frame"])})
        return 0
    policy = HandRule(hello, lead, deadzone)
    ready = {"msg": "ready", "protocol": PROTOCOL, "name": "stdlib hand rule"}
    if lead == 0:
        ready["batch"] = 32  # stateless: the last ball is only used to lead
    send(out, ready)
    size = hello["frame"][0] * hello["frame"][1] * hello["frame"][2]
    while True:
        header, payload = read_message(inp)
        if header is None or header["msg"] == "bye":
            return 0
        kind = header["msg"]
        if kind == "start":
            policy.reset()
        elif kind == "step":
            action = policy.act(payload)
            send(out, {"msg": "action", "t": header["t"], "action": action,
                       "weights": policy.last_weights})
        elif kind == "batch":
            k = header["count"]
            flat = []
            for i in range(k):
                flat.extend(policy.act(payload[i * size:(i + 1) * size]))
            send(out, {"msg": "actions", "t": header["t"][0], "count": k, "action": flat})
        elif kind == "end":
            log("episode", header.get("episode"), "return", header.get("return"))


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
