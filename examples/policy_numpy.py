#!/usr/bin/env python3
"""A tilebench policy with NumPy: where to start your own.

The observation arrives as a NumPy array: a frame (height, width, channels)
or, with obs "tokens", the token set (n, patch_h, patch_w, channels) and
each token's grid cell (n, 2). Replace `Policy.act` with your model (a
PyTorch or JAX forward pass); the rest is the protocol
(docs/policy-protocol.md).

As shipped it plays the paddle game with the same hand rule as
policy_stdlib.py: move the paddle towards the ball. On recorded frames
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
import json
import socket
import sys

import numpy as np

PROTOCOL = 1
MAX_LINE = 65536
PADDLE_ROW = 76  # the paddle's row in the 84x84 paddle field
BATCH = 64  # observations per batch message offered in ready (--batch N; 0: none)


def log(*args):
    print("policy_numpy:", *args, file=sys.stderr)


def read_message(inp):
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


class Observation:
    """Decodes step payloads into arrays (values scaled to [0, 1])."""

    def __init__(self, hello):
        self.kind = hello["obs"]
        self.dtype = np.uint8 if hello["dtype"] == "uint8" else np.dtype("<f4")
        self.frame_shape = tuple(hello["frame"])
        tk = hello["tokens"]
        self.patch = (tk["patch"][0], tk["patch"][1], tk["channels"])
        self.stride = tuple(tk["stride"])
        self.dim = tk["dim"]
        self.rows, self.cols = tk["rows"], tk["cols"]

    def size(self, n):
        """Payload bytes of one observation (n tokens for obs tokens)."""
        item = np.dtype(self.dtype).itemsize
        if self.kind == "frame":
            return int(np.prod(self.frame_shape)) * item
        return n * self.dim * item + 4 * n

    def decode(self, header, payload):
        """Returns (frame, tokens, cells); frame is rebuilt from tokens."""
        scale = 255.0 if self.dtype == np.uint8 else 1.0
        if self.kind == "frame":
            frame = np.frombuffer(payload, dtype=self.dtype).reshape(self.frame_shape) / scale
            return frame, None, None
        n = header["n"]
        size = np.dtype(self.dtype).itemsize
        values = np.frombuffer(payload, dtype=self.dtype, count=n * self.dim)
        tokens = values.reshape((n,) + self.patch) / scale
        cells = np.frombuffer(payload, dtype="<i2", offset=n * self.dim * size).reshape(n, 2)
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
    def __init__(self, hello):
        self.action = hello["action"]
        self.recording = hello["game"] == "recording"

    def act_batch(self, obs, header, payload, k, dim):
        """The actions for the k observations of one step or batch
        message (header and payload as received). The last observation
        decoded is kept in self.last (None if not decoded), for weights."""
        self.last = None
        if self.recording and obs.kind == "frame" and obs.dtype == np.uint8:
            raw = np.frombuffer(payload, dtype=np.uint8).reshape((k,) + obs.frame_shape)
            return brightness_rule(raw, self.action)
        ns = header.get("n") if k > 1 or header["msg"] == "batch" else [header.get("n", 0)]
        prev = header.get("prev") or [0] * (k * dim)
        decoded, off = [], 0
        for i in range(k):
            n = ns[i] if ns else 0
            size = obs.size(n)
            decoded.append(obs.decode({"n": n}, payload[off:off + size]))
            off += size
        self.last = decoded[-1]
        if self.recording:
            raw = np.stack([np.rint(f * 255).astype(np.uint8) for f, _, _ in decoded])
            return brightness_rule(raw, self.action)
        return [self.act(f, t, c, prev[i * dim:(i + 1) * dim]) for i, (f, t, c) in enumerate(decoded)]

    def reset(self, seed):
        self.rng = np.random.default_rng(seed)

    def act(self, frame, tokens, cells, prev):
        field = frame[:PADDLE_ROW]
        bright = np.all(field >= 200 / 255, axis=2)
        ys, xs = np.nonzero(bright)
        row = frame[PADDLE_ROW]
        far = np.abs(row - np.median(row, axis=0)).sum(axis=1) > 90 / 255
        if len(xs) == 0 or not far.any():
            move = 0.0
        else:
            gap = xs.mean() - np.nonzero(far)[0].mean()
            move = 0.0 if abs(gap) <= 2 else float(np.clip(gap / 4.0, -1, 1))
        if self.action["kind"] == "discrete":
            return [int(np.sign(move)) + 1]
        lo, hi = self.action["low"][0], self.action["high"][0]
        return [float(np.clip(move, lo, hi))] + [0.0] * (self.action["dim"] - 1)


def session(inp, out):
    """Answers one session: hello, episodes, bye."""
    hello, _ = read_message(inp)
    if hello is None or hello.get("msg") != "hello":
        log("no hello")
        return 1
    if hello.get("protocol") != PROTOCOL:
        send(out, {"msg": "refuse", "reason": "speaks protocol %d only" % PROTOCOL})
        return 0
    recording = hello["game"] == "recording"
    if not recording and (hello["game"] != "paddle" or hello["frame"][2] != 3 or hello["frame"][0] <= PADDLE_ROW):
        send(out, {"msg": "refuse", "reason": "the hand rule needs the paddle game in RGB"})
        return 0
    obs = Observation(hello)
    policy = Policy(hello)
    policy.reset(0)
    ready = {"msg": "ready", "protocol": PROTOCOL, "name": "numpy brightness rule" if recording else "numpy hand rule"}
    if BATCH > 1:
        ready["batch"] = BATCH  # both rules keep no state between frames
    send(out, ready)
    dim = hello["action"]["dim"]
    while True:
        header, payload = read_message(inp)
        if header is None or header["msg"] == "bye":
            return 0
        kind = header["msg"]
        if kind == "start":
            policy.reset(header["seed"])
        elif kind == "step":
            action = policy.act_batch(obs, header, payload, 1, dim)[0]
            reply = {"msg": "action", "t": header["t"], "action": action}
            if policy.last is not None:
                frame, tokens, _ = policy.last
                reply["weights"] = obs.weights(frame, tokens)
            send(out, reply)
        elif kind == "batch":
            flat = [v for a in policy.act_batch(obs, header, payload, header["count"], dim) for v in a]
            send(out, {"msg": "actions", "t": header["t"][0], "count": header["count"], "action": flat})
        elif kind == "end":
            log("episode", header.get("episode"), "return", header.get("return"))


def serve(address, sessions):
    """Listens on HOST:PORT and answers sessions one after another (0:
    forever). Port 0 picks a free port; the address is logged."""
    host, port = address.rsplit(":", 1)
    with socket.create_server((host, int(port))) as srv:
        log("listening on %s:%d" % srv.getsockname()[:2])
        done = 0
        while sessions == 0 or done < sessions:
            conn, peer = srv.accept()
            conn.setsockopt(socket.IPPROTO_TCP, socket.TCP_NODELAY, 1)
            with conn, conn.makefile("rb") as inp, conn.makefile("wb") as out:
                try:
                    session(inp, out)
                except (OSError, ValueError, EOFError) as err:
                    log("session from %s ended: %s" % (peer[0], err))
            done += 1
    return 0


def main(argv):
    global BATCH
    if argv[:1] == ["--batch"] and len(argv) >= 2:
        BATCH = int(argv[1])
        argv = argv[2:]
    if argv[:1] == ["--listen"] and len(argv) in (2, 4):
        sessions = int(argv[3]) if len(argv) == 4 and argv[2] == "--sessions" else 0
        return serve(argv[1], sessions)
    if argv:
        log("usage: policy_numpy.py [--batch N] [--listen HOST:PORT [--sessions N]]")
        return 2
    return session(sys.stdin.buffer, sys.stdout.buffer)


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
