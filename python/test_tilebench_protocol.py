"""Tests of tilebench_protocol: a scripted tilebench side over in-memory
streams and TCP, and recordings written here with numpy.save.

    python3 -m unittest discover -s python
"""
import io
import json
import os
import socket
import sys
import tempfile
import threading
import time
import unittest

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import tilebench_protocol as tp  # noqa: E402

try:
    import numpy as np
except ImportError:
    np = None

HELLO = {"msg": "hello", "protocol": 1, "game": "paddle", "obs": "frame", "dtype": "uint8",
         "frame": [4, 6, 3],
         "tokens": {"max": 6, "dim": 12, "rows": 2, "cols": 3, "patch": [2, 2], "stride": [2, 2],
                    "channels": 3, "width": 6, "height": 4, "edge": "pad", "fill": 0},
         "action": {"kind": "continuous", "names": ["a", "b"], "low": [-1, -1], "high": [1, 1], "dim": 2}}


def message(header, payload=b""):
    if payload:
        header = dict(header, len=len(payload))
    return json.dumps(header).encode() + b"\n" + payload


def frame(k):
    """A 4x6x3 frame whose every byte is k."""
    return bytes([k]) * 72


def replies(data):
    return [json.loads(line) for line in data.decode().splitlines()]


class FakeTilebench:
    """The messages tilebench would send in a frame session."""

    def __init__(self, hello=HELLO):
        self.parts = [message(hello)]

    def start(self, seed=5):
        self.parts.append(message({"msg": "start", "episode": 0, "seed": seed}))
        return self

    def step(self, t, payload, prev=None, n=None):
        h = {"msg": "step", "t": t, "prev": prev or [0, 0]}
        if n is not None:
            h["n"] = n
        self.parts.append(message(h, payload))
        return self

    def batch(self, ts, payloads, prev):
        self.parts.append(message({"msg": "batch", "count": len(ts), "t": ts, "prev": prev}, b"".join(payloads)))
        return self

    def end(self):
        self.parts.append(message({"msg": "end", "episode": 0, "return": 1.5, "steps": 2}))
        return self

    def bye(self):
        self.parts.append(message({"msg": "bye"}))
        return io.BytesIO(b"".join(self.parts))


class ServeTest(unittest.TestCase):
    def run_session(self, policy, inp, **kw):
        out = io.BytesIO()
        rc = tp.serve_session(policy, inp, out, **kw)
        return rc, replies(out.getvalue())

    def test_steps(self):
        seen = []

        def act(obs):
            seen.append((obs.t, list(obs.prev), obs.raw[0]))
            return [obs.raw[0] / 255, -0.5]
        inp = FakeTilebench().start().step(0, frame(51)).step(1, frame(102), prev=[0.2, -0.5]).end().bye()
        rc, out = self.run_session(act, inp, name="test policy")
        self.assertEqual(rc, 0)
        self.assertEqual(out[0], {"msg": "ready", "protocol": 1, "name": "test policy"})
        self.assertEqual(out[1], {"msg": "action", "t": 0, "action": [0.2, -0.5]})
        self.assertEqual(out[2]["t"], 1)
        self.assertEqual(len(out), 3)  # start, end and bye are not answered
        self.assertEqual(seen, [(0, [0, 0], 51), (1, [0.2, -0.5], 102)])

    def test_object_with_setup_start_end_and_weights(self):
        class P:
            def __init__(self):
                self.log = []

            def setup(self, session):
                self.log.append(("setup", session.game, session.frame_shape, session.action_dim))
                return {"invariant": True}

            def start(self, seed):
                self.log.append(("start", seed))

            def end(self, header):
                self.log.append(("end", header["return"]))

            def act(self, obs):
                return {"action": [0, 0], "weights": [1.0] * 6}
        p = P()
        rc, out = self.run_session(p, FakeTilebench().start(9).step(0, frame(1)).end().bye())
        self.assertTrue(out[0]["invariant"])
        self.assertEqual(out[1]["weights"], [1.0] * 6)
        self.assertEqual(p.log, [("setup", "paddle", (4, 6, 3), 2), ("start", 9), ("end", 1.5)])

    def test_batch(self):
        calls = []

        def act(batch):
            calls.append([o.t for o in batch])
            return [[o.raw[0] / 255, o.prev[0]] for o in batch]
        inp = FakeTilebench().start().batch([0, 1, 2], [frame(0), frame(51), frame(255)],
                                            [0, 0, 0.5, 0, -1, 0]).step(3, frame(51)).bye()
        rc, out = self.run_session(act, inp, batch=8)
        self.assertEqual(out[0]["batch"], 8)
        self.assertEqual(out[1], {"msg": "actions", "t": 0, "count": 3, "action": [0.0, 0.0, 0.2, 0.5, 1.0, -1.0]})
        self.assertEqual(out[2], {"msg": "action", "t": 3, "action": [0.2, 0.0]})
        self.assertEqual(calls, [[0, 1, 2], [3]])

    @unittest.skipIf(np is None, "needs NumPy")
    def test_batch_frames_and_array_replies(self):
        got = {}

        def act(batch):
            got["frames"] = batch.frames
            got["raw"] = [o.raw for o in batch]
            got["views"] = [o.frame for o in batch]
            # Mean of each frame's first channel, scaled; and the step.
            f = batch.frames.astype(np.float64)
            return np.stack([f[:, :, :, 0].mean(axis=(1, 2)) / 255, [o.t / 10 for o in batch]], axis=1)
        inp = FakeTilebench().start().batch([0, 1, 2], [frame(0), frame(51), bytes(range(72))],
                                            [0] * 6).step(3, frame(255)).bye()
        rc, out = self.run_session(act, inp, batch=8)
        first = float(np.arange(0, 72, 3).mean()) / 255  # channel 0 of bytes 0..71: every third byte
        self.assertEqual(out[1], {"msg": "actions", "t": 0, "count": 3, "action": [0.0, 0.0, 0.2, 0.1, first, 0.2]})
        self.assertEqual(out[2], {"msg": "action", "t": 3, "action": [1.0, 0.3]})
        # The batch's frames: one read-only array over the payload, the
        # same bytes as each observation's frame and raw.
        fr = got["frames"]
        self.assertEqual(fr.shape, (1, 4, 6, 3))  # the last call: the step
        self.assertFalse(fr.flags.writeable)
        self.assertEqual(got["raw"], [frame(255)])
        self.assertTrue(np.array_equal(got["views"][0], fr[0]))

    @unittest.skipIf(np is None, "needs NumPy")
    def test_batch_views_are_the_payload(self):
        seen = []

        def act(batch):
            seen.append((batch.frames.copy(), [o.raw for o in batch], [o.frame.copy() for o in batch]))
            return [[0, 0]] * len(batch)
        payloads = [bytes(range(i, i + 72)) for i in (0, 100, 180)]
        self.run_session(act, FakeTilebench().start().batch([4, 5, 6], payloads, [0] * 6).bye(), batch=4)
        frames, raws, views = seen[0]
        self.assertEqual(raws, payloads)
        for i, p in enumerate(payloads):
            want = np.frombuffer(p, dtype=np.uint8).reshape(4, 6, 3)
            self.assertTrue(np.array_equal(frames[i], want))
            self.assertTrue(np.array_equal(views[i], want))

    def test_array_reply_of_the_wrong_size(self):
        if np is None:
            self.skipTest("needs NumPy")
        inp = FakeTilebench().start().batch([0, 1], [frame(0), frame(1)], [0] * 4).bye()
        rc, out = self.run_session(lambda b: np.zeros((2, 3)), inp, batch=4)
        self.assertEqual(out[1]["msg"], "error")
        self.assertIn("2 actions of 2 values", out[1]["reason"])
        hello = dict(HELLO, action={"kind": "discrete", "names": ["l", "s", "r"], "dim": 1})
        inp = FakeTilebench(hello).start().batch([0, 1], [frame(0), frame(1)], [0, 0]).bye()
        rc, out = self.run_session(lambda b: np.array([[2.0], [1.0]]), inp, batch=4)
        self.assertEqual(out[1]["action"], [2, 1])
        self.assertTrue(all(isinstance(v, int) for v in out[1]["action"]))

    def test_refuse_and_errors(self):
        class Refuses:
            def setup(self, session):
                return "not my game"

            def act(self, obs):
                return [0, 0]
        rc, out = self.run_session(Refuses(), FakeTilebench().bye())
        self.assertEqual(out, [{"msg": "refuse", "reason": "not my game"}])
        rc, out = self.run_session(lambda o: [0, 0], FakeTilebench(dict(HELLO, protocol=2)).bye())
        self.assertEqual(out[0]["msg"], "refuse")

        def broken(obs):
            raise RuntimeError("out of memory")
        rc, out = self.run_session(broken, FakeTilebench().start().step(0, frame(1)).step(1, frame(1)).bye())
        self.assertEqual(out[1], {"msg": "error", "reason": "RuntimeError: out of memory"})
        self.assertEqual(len(out), 2)  # the session ended at the error
        # A NaN action cannot be sent as JSON: the policy reports an error.
        rc, out = self.run_session(lambda o: [float("nan"), 0], FakeTilebench().start().step(0, frame(1)).bye())
        self.assertEqual(out[1]["msg"], "error")

    def test_bad_input(self):
        with self.assertRaises(tp.ProtocolError):
            tp.read_message(io.BytesIO(b"{not json}\n"))
        with self.assertRaises(tp.ProtocolError):
            tp.read_message(io.BytesIO(b'{"msg":"step","len":10}\nabc'))
        with self.assertRaises(tp.ProtocolError):
            tp.read_message(io.BytesIO(b"x" * (tp.MAX_LINE + 5)))
        self.assertEqual(tp.read_message(io.BytesIO(b"")), (None, None))
        self.assertEqual(tp.serve_session(lambda o: [0, 0], io.BytesIO(message({"msg": "step", "t": 0})), io.BytesIO()), 1)

    def test_discrete_actions_are_integers(self):
        hello = dict(HELLO, action={"kind": "discrete", "names": ["l", "s", "r"], "dim": 1})
        rc, out = self.run_session(lambda o: 2.0, FakeTilebench(hello).start().step(0, frame(1), prev=[0]).bye())
        self.assertEqual(out[1]["action"], [2])
        self.assertIsInstance(out[1]["action"][0], int)

    @unittest.skipIf(np is None, "needs NumPy")
    def test_arrays(self):
        got = {}

        def act(obs):
            got["frame"] = obs.frame.copy()
            got["pixels"] = obs.pixels()
            return np.array([0.25, -0.25], dtype=np.float32)
        payload = bytes(range(72))
        rc, out = self.run_session(act, FakeTilebench().start().step(0, payload).bye())
        self.assertEqual(got["frame"].shape, (4, 6, 3))
        self.assertEqual(int(got["frame"][1, 2, 0]), (1 * 6 + 2) * 3)  # row-major, channels last
        self.assertAlmostEqual(float(got["pixels"][0, 0, 2]), 2 / 255, places=6)
        self.assertEqual(out[1]["action"], [0.25, -0.25])

    @unittest.skipIf(np is None, "needs NumPy")
    def test_tokens(self):
        hello = dict(HELLO, obs="tokens", dtype="float32")
        vals = np.arange(2 * 12, dtype="<f4") / 100
        cells = np.array([[1, 2], [-1, -1]], dtype="<i2")
        got = {}

        def act(obs):
            got["tokens"], got["cells"] = obs.tokens.copy(), obs.cells.copy()
            return [0, 0]
        self.run_session(act, FakeTilebench(hello).start().step(0, vals.tobytes() + cells.tobytes(), n=2).bye())
        self.assertEqual(got["tokens"].shape, (2, 2, 2, 3))
        self.assertAlmostEqual(float(got["tokens"][1, 0, 1, 2]), 0.17, places=6)  # token 1, y 0, x 1, channel 2
        self.assertEqual(got["cells"].tolist(), [[1, 2], [-1, -1]])

    def test_without_numpy(self):
        saved = tp.np
        tp.np = None
        try:
            got = {}

            def act(obs):
                got["frame"] = obs.frame
                return [0, 0]
            self.run_session(act, FakeTilebench().start().step(0, frame(7)).bye())
            self.assertEqual(got["frame"], frame(7))
        finally:
            tp.np = saved

    def test_tcp(self):
        err = io.StringIO()
        saved = sys.stderr
        sys.stderr = err
        th = threading.Thread(target=tp.serve, args=(lambda o: [0.5, 0.5],),
                              kwargs={"listen": "127.0.0.1:0", "sessions": 1, "log_name": "t"})
        th.start()
        try:
            for _ in range(200):
                if "listening on" in err.getvalue():
                    break
                time.sleep(0.01)
        finally:
            sys.stderr = saved
        addr = err.getvalue().split("listening on ")[1].split()[0]
        host, port = addr.rsplit(":", 1)
        with socket.create_connection((host, int(port))) as c:
            c.sendall(FakeTilebench().start().step(0, frame(3)).bye().getvalue())
            data = b""
            while data.count(b"\n") < 2:
                chunk = c.recv(4096)
                if not chunk:
                    break
                data += chunk
        th.join(5)
        out = replies(data)
        self.assertEqual(out[0]["msg"], "ready")
        self.assertEqual(out[1], {"msg": "action", "t": 0, "action": [0.5, 0.5]})
        with self.assertRaises(ValueError):
            tp.serve(lambda o: [0], listen="nowhere")


@unittest.skipIf(np is None, "needs NumPy")
class LoadRecordingTest(unittest.TestCase):
    def write(self, folder, rows=5, complete=True, actions_dtype="<f4"):
        arrays = {
            "frames": np.zeros((rows, 4, 6, 3), np.uint8),
            "actions": np.zeros((rows, 2), actions_dtype),
            "prev_actions": np.zeros((rows, 2), "<f4"),
            "rewards": np.ones(rows, "<f4"),
            "episode_starts": np.arange(rows) % 3 == 0,
            "seeds": np.zeros(rows, "<u8"),
            "steps": np.arange(rows, dtype="<i4") % 3,
        }
        files = []
        for k, a in arrays.items():
            np.save(os.path.join(folder, k + ".npy"), a)
            files.append({"name": k + ".npy", "dtype": np.dtype("<f4" if k == "actions" else a.dtype).str,
                          "shape": list(a.shape[1:])})
        m = {"format": 1, "tool": "tilebench record", "rows": rows, "files": files, "complete": complete}
        with open(os.path.join(folder, "manifest.json"), "w") as f:
            json.dump(m, f)

    def test_load(self):
        with tempfile.TemporaryDirectory() as d:
            self.write(d)
            rec = tp.load_recording(d)
            self.assertEqual(rec["frames"].shape, (5, 4, 6, 3))
            self.assertEqual(rec["episode_starts"].tolist(), [True, False, False, True, False])
            self.assertEqual(rec["manifest"]["rows"], 5)
            mm = tp.load_recording(d, mmap=True)
            self.assertIsInstance(mm["frames"], np.memmap)

    def test_refused(self):
        with tempfile.TemporaryDirectory() as d:
            with self.assertRaisesRegex(ValueError, "not a recording"):
                tp.load_recording(d)
            self.write(d, complete=False)
            with self.assertRaisesRegex(ValueError, "not complete"):
                tp.load_recording(d)
            self.write(d, actions_dtype="<f8")
            with self.assertRaisesRegex(ValueError, "actions.npy"):
                tp.load_recording(d)


if __name__ == "__main__":
    unittest.main()
