"""Serve a policy to tilebench, and load the datasets "tilebench record" writes.

One module, standard library only (NumPy is used when it is installed):

* ``serve(policy, batch=None)`` answers tilebench's policy protocol
  (docs/policy-protocol.md) on stdin/stdout, as ``--policy 'exec:python3
  my_policy.py'`` expects, or over TCP with ``listen="HOST:PORT"``, as
  ``--policy tcp://HOST:PORT`` expects.
* ``load_recording(folder)`` reads a dataset written by ``tilebench
  record`` (docs/recording.md) into NumPy arrays, checked against its
  manifest.

A whole policy::

    import tilebench_protocol as tp

    def act(obs):                      # one Observation -> one action
        return [0.0] * obs.session.action_dim

    tp.serve(act)

Use it by path (``PYTHONPATH=python``) or install it:
``pip install --no-build-isolation ./python``.

Logs go to stderr; stdout carries protocol messages only.
"""

import json
import os
import socket
import sys

try:
    import numpy as np
except ImportError:  # the protocol works without NumPy; arrays do not
    np = None

__all__ = ["PROTOCOL", "MAX_LINE", "ProtocolError", "Session", "Observation", "Batch",
           "read_message", "send", "serve", "serve_session", "load_recording"]

PROTOCOL = 1
"""The protocol version this module speaks."""

MAX_LINE = 65536
"""The longest header line, newline included, either direction."""


class ProtocolError(Exception):
    """A message from tilebench that does not follow the protocol."""


def read_message(inp):
    """Reads one message from the binary stream ``inp``.

    Returns ``(header, payload)``: the header as a dict and the payload
    bytes (``b""`` when there is none), or ``(None, None)`` at the end of
    the stream. Raises ProtocolError for a line that is too long, cut off
    or not JSON, or a payload cut short.
    """
    line = inp.readline(MAX_LINE + 1)
    if not line:
        return None, None
    if not line.endswith(b"\n"):
        raise ProtocolError("header line longer than %d bytes or cut off" % MAX_LINE)
    try:
        header = json.loads(line)
    except ValueError as err:
        raise ProtocolError("header line is not JSON: %s" % err) from None
    if not isinstance(header, dict) or not isinstance(header.get("msg"), str):
        raise ProtocolError("header is not an object with a msg")
    n = header.get("len", 0) or 0
    if not isinstance(n, int) or n < 0:
        raise ProtocolError("len %r is not a byte count" % (n,))
    payload = inp.read(n) if n else b""
    if len(payload) != n:
        raise ProtocolError("payload cut off: %d of %d bytes" % (len(payload), n))
    return header, payload


def send(out, message):
    """Writes one header line (a dict, no payload) to ``out`` and flushes."""
    line = json.dumps(message, separators=(",", ":"), allow_nan=False).encode("utf-8") + b"\n"
    if len(line) > MAX_LINE:
        raise ProtocolError("reply of %d bytes is over the %d-byte line limit" % (len(line), MAX_LINE))
    out.write(line)
    out.flush()


class Session:
    """What tilebench's hello said, in handy form.

    Attributes: ``hello`` (the whole dict), ``game``, ``obs`` ("frame" or
    "tokens"), ``dtype`` ("uint8" or "float32"), ``frame_shape``
    ``(height, width, channels)``, ``grid`` (the hello's "tokens" dict:
    rows, cols, patch, stride, dim, max, ...), ``action`` (the hello's
    "action" dict: kind, names, dim, low, high), ``action_dim``,
    ``discrete`` (bool), ``episode`` and ``seed`` of the current episode.
    """

    def __init__(self, hello):
        self.hello = hello
        self.game = hello.get("game")
        self.obs = hello.get("obs", "frame")
        self.dtype = hello.get("dtype", "uint8")
        self.frame_shape = tuple(hello.get("frame", (0, 0, 0)))
        self.grid = hello.get("tokens", {})
        self.action = hello.get("action", {})
        self.action_dim = int(self.action.get("dim", 1))
        self.discrete = self.action.get("kind") == "discrete"
        self.episode = -1
        self.seed = 0
        self.item = 1 if self.dtype == "uint8" else 4

    def size(self, n=0):
        """Payload bytes of one observation (``n`` tokens for obs tokens)."""
        if self.obs == "frame":
            h, w, c = self.frame_shape
            return h * w * c * self.item
        return n * self.grid["dim"] * self.item + 4 * n


class Observation:
    """One observation, decoded lazily.

    Attributes: ``t`` (step index), ``prev`` (previous action, a list),
    ``n`` (token count, obs tokens), ``session`` (the Session), ``raw``
    (the payload bytes; for an observation of a batch, its part of the
    batch's payload, copied out only when ``raw`` is read). Properties:
    ``frame`` (H×W×C array in the dtype sent, a read-only view of the
    payload; bytes without NumPy), ``tokens`` (n×ph×pw×C array), ``cells``
    (n×2 int16 array of (row, col), (-1, -1) for an added token).
    ``pixels()`` is the frame as float32 in [0, 1].

    ``Observation(session, t, prev, raw, n=0, offset=0, size=None)``: the
    observation is ``size`` bytes of ``raw`` from ``offset`` (all of it
    by default).
    """

    __slots__ = ("t", "prev", "n", "session", "_buf", "_off", "_size")

    def __init__(self, session, t, prev, raw, n=0, offset=0, size=None):
        self.session, self.t, self.prev, self.n = session, t, prev, n
        self._buf, self._off = raw, offset
        self._size = len(raw) - offset if size is None else size

    @property
    def raw(self):
        if self._off == 0 and self._size == len(self._buf):
            return self._buf
        return bytes(self._view())

    def _view(self):
        """The observation's payload bytes without a copy."""
        if self._off == 0 and self._size == len(self._buf):
            return self._buf
        return memoryview(self._buf)[self._off:self._off + self._size]

    def _dtype(self):
        return np.uint8 if self.session.dtype == "uint8" else np.dtype("<f4")

    @property
    def frame(self):
        if self.session.obs != "frame":
            raise AttributeError("obs is tokens: use .tokens and .cells")
        if np is None:
            return self.raw
        return np.frombuffer(self._view(), dtype=self._dtype()).reshape(self.session.frame_shape)

    @property
    def tokens(self):
        if self.session.obs != "tokens":
            raise AttributeError("obs is frame: use .frame")
        g = self.session.grid
        shape = (self.n, g["patch"][0], g["patch"][1], g["channels"])
        if np is None:
            return self.raw[:self.n * g["dim"] * self.session.item]
        return np.frombuffer(self._view(), dtype=self._dtype(), count=self.n * g["dim"]).reshape(shape)

    @property
    def cells(self):
        if self.session.obs != "tokens":
            raise AttributeError("obs is frame: there are no cells")
        off = self.n * self.session.grid["dim"] * self.session.item
        if np is None:
            import struct
            return [struct.unpack_from("<hh", self.raw, off + 4 * i) for i in range(self.n)]
        return np.frombuffer(self._view(), dtype="<i2", offset=off, count=2 * self.n).reshape(self.n, 2)

    def pixels(self):
        """The frame as float32 values in [0, 1] (needs NumPy)."""
        f = self.frame
        return f.astype(np.float32) / 255 if f.dtype == np.uint8 else f


class Batch(list):
    """The Observations of one message, as a list, for a policy served
    with ``batch``; a step message gives a Batch of one.

    ``frames`` is the whole batch's frames as one read-only (k, H, W, C)
    array over the message's payload, made without copying (obs frame,
    with NumPy): a vectorised policy computes on it at once rather than
    stacking the observations' frames.
    """

    __slots__ = ("session", "payload")

    def __init__(self, session, observations, payload):
        list.__init__(self, observations)
        self.session, self.payload = session, payload

    @property
    def frames(self):
        s = self.session
        if s.obs != "frame":
            raise AttributeError("obs is tokens: use each observation's .tokens and .cells")
        if np is None:
            raise AttributeError("frames needs NumPy")
        dt = np.uint8 if s.dtype == "uint8" else np.dtype("<f4")
        return np.frombuffer(self.payload, dtype=dt, count=len(self) * s.size() // s.item).reshape((len(self),) + s.frame_shape)


def _flat_actions(r, k, session):
    """A batch policy's answer (a list of actions, or an array of k
    actions) as the reply's flat list of k·dim numbers."""
    dim = session.action_dim
    if np is not None and isinstance(r, np.ndarray):
        if r.size != k * dim:
            raise ValueError("%d actions of %d values wanted, got an array of shape %s" % (k, dim, r.shape))
        if session.discrete:
            return [int(v) for v in r.reshape(-1).tolist()]
        return r.astype(np.float64, copy=False).reshape(-1).tolist()
    flat = []
    for a in r:
        flat.extend(_reply(a, session)[0])
    return flat


def _action_list(a, session):
    """An action as the protocol's list of numbers."""
    if np is not None and isinstance(a, np.ndarray):
        a = a.reshape(-1).tolist()
    elif isinstance(a, (int, float)):
        a = [a]
    a = list(a)
    if session.discrete:
        return [int(v) for v in a]
    return [float(v) for v in a]


def _reply(r, session):
    """Splits a policy's answer into (action list, weights or None)."""
    if isinstance(r, dict):
        w = r.get("weights")
        if w is not None:
            w = [float(v) for v in (w.reshape(-1).tolist() if np is not None and isinstance(w, np.ndarray) else w)]
        return _action_list(r["action"], session), w
    return _action_list(r, session), None


def serve_session(policy, inp, out, batch=None, name=None):
    """Answers one session (hello to bye) on the binary streams inp/out.

    ``policy`` and ``batch`` are as for ``serve``. Returns 0 at a normal
    end, 1 when tilebench sent no hello. A policy that raises sends the
    protocol's ``error`` with the exception's text and the session ends.
    """
    act = getattr(policy, "act", policy)
    hello, _ = read_message(inp)
    if hello is None or hello.get("msg") != "hello":
        return 1
    if hello.get("protocol") != PROTOCOL:
        send(out, {"msg": "refuse", "reason": "speaks protocol %d only" % PROTOCOL})
        return 0
    session = Session(hello)
    ready = {"msg": "ready", "protocol": PROTOCOL}
    if name:
        ready["name"] = name
    if batch is not None and int(batch) >= 2:
        ready["batch"] = int(batch)
    setup = getattr(policy, "setup", None)
    if setup is not None:
        try:
            r = setup(session)
        except Exception as err:  # refuse with the reason rather than crash
            send(out, {"msg": "refuse", "reason": "%s: %s" % (type(err).__name__, err)})
            return 0
        if isinstance(r, str):
            send(out, {"msg": "refuse", "reason": r})
            return 0
        if isinstance(r, dict):
            ready.update(r)
    send(out, ready)
    start, end = getattr(policy, "start", None), getattr(policy, "end", None)
    dim = session.action_dim
    while True:
        header, payload = read_message(inp)
        if header is None or header["msg"] == "bye":
            return 0
        kind = header["msg"]
        try:
            if kind == "start":
                session.episode, session.seed = header.get("episode", 0), header.get("seed", 0)
                if start is not None:
                    start(session.seed)
            elif kind == "end":
                if end is not None:
                    end(header)
            elif kind == "step":
                obs = Observation(session, header["t"], header.get("prev") or [0] * dim, payload, header.get("n", 0))
                if batch is None:
                    a, w = _reply(act(obs), session)
                else:
                    r = act(Batch(session, [obs], payload))
                    a, w = (_flat_actions(r, 1, session), None) if np is not None and isinstance(r, np.ndarray) else _reply(r[0], session)
                reply = {"msg": "action", "t": header["t"], "action": a}
                if w is not None:
                    reply["weights"] = w
                send(out, reply)
            elif kind == "batch":
                k = header["count"]
                ts, prev, ns = header["t"], header.get("prev") or [0] * (k * dim), header.get("n") or [0] * k
                # Each observation is its part of the payload, not a copy.
                obs, off = [], 0
                for i in range(k):
                    size = session.size(ns[i])
                    obs.append(Observation(session, ts[i], prev[i * dim:(i + 1) * dim], payload, ns[i], off, size))
                    off += size
                if batch is not None:
                    flat = _flat_actions(act(Batch(session, obs, payload)), k, session)
                else:
                    flat = _flat_actions([act(o) for o in obs], k, session)
                send(out, {"msg": "actions", "t": ts[0], "count": k, "action": flat})
        except (ProtocolError, OSError):
            raise
        except Exception as err:
            send(out, {"msg": "error", "reason": ("%s: %s" % (type(err).__name__, err))[:1000]})
            return 0


def serve(policy, batch=None, *, name=None, listen=None, sessions=0, log_name=None):
    """Serves ``policy`` to tilebench and returns an exit status.

    ``policy`` is a function of one Observation returning one action (a
    list or array of ``action_dim`` numbers; for a discrete game the
    choice index), or a dict ``{"action": ..., "weights": ...}`` to say
    where it looked. It may instead be an object whose ``act`` is that
    function and which may also have ``setup(session)`` (called at hello;
    return a string to refuse the session, or a dict of extra ``ready``
    keys), ``start(seed)`` (a new episode: clear recurrent state) and
    ``end(header)``.

    ``batch=B`` declares a stateless policy that takes up to B
    observations at once: the function then gets a Batch (a list of
    Observations whose ``frames`` is all their frames in one array, made
    without copying) and returns a list of actions or an array of shape
    (k, action_dim) (a step message gives a Batch of one).
    Leave it None for a policy that keeps state between steps.

    Without ``listen`` one session is served on stdin/stdout (the
    ``exec:`` transport). With ``listen="HOST:PORT"`` a TCP server
    answers sessions one per connection (``tcp://HOST:PORT``); port 0
    picks a free one; ``sessions`` stops after that many (0: forever).
    The address is logged to stderr as ``LOG_NAME: listening on
    HOST:PORT``. ``name`` appears in tilebench's reports.
    """
    log_name = log_name or os.path.splitext(os.path.basename(sys.argv[0] or "policy"))[0]
    if listen is None:
        return serve_session(policy, sys.stdin.buffer, sys.stdout.buffer, batch, name)
    host, _, port = listen.rpartition(":")
    if not host or not port.isdigit():
        raise ValueError("listen %r: want HOST:PORT" % listen)
    with socket.create_server((host, int(port))) as srv:
        print("%s: listening on %s:%d" % ((log_name,) + srv.getsockname()[:2]), file=sys.stderr, flush=True)
        done = 0
        while sessions == 0 or done < sessions:
            conn, peer = srv.accept()
            conn.setsockopt(socket.IPPROTO_TCP, socket.TCP_NODELAY, 1)
            with conn, conn.makefile("rb") as inp, conn.makefile("wb") as out:
                try:
                    serve_session(policy, inp, out, batch, name)
                except (OSError, ProtocolError) as err:
                    print("%s: session from %s ended: %s" % (log_name, peer[0], err), file=sys.stderr, flush=True)
            done += 1
    return 0


def load_recording(folder, mmap=False):
    """Loads a dataset written by ``tilebench record`` (docs/recording.md).

    Returns a dict of NumPy arrays, one per file, named as the files
    without ``.npy`` ("frames" or "tokens"/"cells"/"token_count",
    "actions", "labels" when relabelled, "prev_actions", "rewards",
    "episode_starts", "seeds", "steps"), each with the dataset's rows on
    its first axis, and the manifest as a dict under "manifest". With
    ``mmap=True`` the arrays are memory-mapped read-only, for datasets
    larger than memory. Raises ValueError naming the file when a file's
    dtype or shape is not the manifest's, or the folder is not a
    complete recording.
    """
    if np is None:
        raise ImportError("load_recording needs NumPy")
    path = os.path.join(folder, "manifest.json")
    try:
        with open(path, encoding="utf-8") as f:
            m = json.load(f)
    except OSError as err:
        raise ValueError("%s: not a recording: %s" % (folder, err.strerror)) from None
    if m.get("format") != 1 or m.get("tool") != "tilebench record":
        raise ValueError("%s: not a tilebench recording (format %r)" % (path, m.get("format")))
    if not m.get("complete"):
        raise ValueError("%s: recording not complete (resume it with tilebench record --resume)" % folder)
    out = {"manifest": m}
    for spec in m["files"]:
        name = spec["name"]
        a = np.load(os.path.join(folder, name), mmap_mode="r" if mmap else None, allow_pickle=False)
        want = (m["rows"],) + tuple(spec["shape"])
        if a.dtype != np.dtype(spec["dtype"]) or a.shape != want:
            raise ValueError("%s: %s %s, manifest says %s %s" % (name, a.dtype, a.shape, spec["dtype"], want))
        out[name[:-4] if name.endswith(".npy") else name] = a
    return out
