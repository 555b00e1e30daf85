#!/usr/bin/python3
"""Independent safetensors reader/writer for checking tilebench's weights package.

Written from the format's public description only, with the Python standard
library (struct, json): an 8-byte little-endian unsigned header length N,
N bytes of UTF-8 JSON (an object mapping each tensor name to
{"dtype", "shape", "data_offsets": [begin, end]}, plus an optional
"__metadata__" object of string to string), then the byte buffer; offsets
are relative to the start of the buffer, values are little-endian, and the
tensors must cover the buffer with no gap and no overlap.

Usage:
  safetensors_ref.py read FILE          print the file's content as JSON
  safetensors_ref.py write FILE         write a mixed-dtype file, print what it holds
  safetensors_ref.py bad DIR            write malformed files into DIR, print their names
  safetensors_ref.py half -             print every binary16 pattern as float32 bits

"read" output: {"format": 1, "metadata": {...}, "tensors": [{"name", "dtype",
"shape", "values"}]} with tensors in data-offset order and values as the
decimal repr of each element widened to a Python float (exact for F32, F64,
F16 and BF16).
"""
import json
import math
import os
import struct
import sys

SIZES = {"F32": 4, "F64": 8, "F16": 2, "BF16": 2}


def decode_values(dtype, raw):
    n = len(raw) // SIZES[dtype]
    if dtype == "F32":
        return list(struct.unpack("<%df" % n, raw))
    if dtype == "F64":
        return list(struct.unpack("<%dd" % n, raw))
    if dtype == "F16":
        # struct's 'e' is IEEE 754 binary16.
        return list(struct.unpack("<%de" % n, raw))
    if dtype == "BF16":
        # bfloat16 is the upper 16 bits of a binary32.
        halves = struct.unpack("<%dH" % n, raw)
        return [struct.unpack("<f", struct.pack("<I", h << 16))[0] for h in halves]
    raise ValueError("unsupported dtype " + dtype)


def read(path):
    with open(path, "rb") as f:
        data = f.read()
    if len(data) < 8:
        raise ValueError("file shorter than 8 bytes")
    (n,) = struct.unpack("<Q", data[:8])
    if n > len(data) - 8:
        raise ValueError("header length beyond file")
    header_bytes = data[8:8 + n]
    if not header_bytes.startswith(b"{"):
        raise ValueError("header does not start with {")

    def no_dupes(pairs):
        keys = [k for k, _ in pairs]
        if len(keys) != len(set(keys)):
            raise ValueError("duplicate key in header")
        return dict(pairs)

    header = json.loads(header_bytes.decode("utf-8").rstrip(" "), object_pairs_hook=no_dupes)
    buf = data[8 + n:]
    meta = header.pop("__metadata__", None)
    if meta is not None:
        for k, v in meta.items():
            if not isinstance(v, str):
                raise ValueError("metadata value not a string")
    items = sorted(header.items(), key=lambda kv: tuple(kv[1]["data_offsets"]))
    pos = 0
    out = []
    for name, info in items:
        dtype = info["dtype"]
        shape = info["shape"]
        begin, end = info["data_offsets"]
        if begin != pos:
            raise ValueError("gap or overlap at " + name)
        count = 1
        for d in shape:
            count *= d
        if count * SIZES[dtype] != end - begin:
            raise ValueError("shape does not match offsets for " + name)
        if end > len(buf):
            raise ValueError("offsets beyond buffer for " + name)
        values = decode_values(dtype, buf[begin:end])
        for v in values:
            if math.isnan(v) or math.isinf(v):
                raise ValueError("non-finite value in " + name)
        out.append({"name": name, "dtype": dtype, "shape": shape, "values": values})
        pos = end
    if pos != len(buf):
        raise ValueError("trailing bytes in buffer")
    return {"format": 1, "metadata": meta, "tensors": out}


def encode(dtype, values):
    if dtype == "F32":
        return struct.pack("<%df" % len(values), *values)
    if dtype == "F64":
        return struct.pack("<%dd" % len(values), *values)
    if dtype == "F16":
        return struct.pack("<%de" % len(values), *values)
    if dtype == "BF16":
        # Take the upper half of the binary32 bits (values chosen exact).
        words = [struct.unpack("<I", struct.pack("<f", v))[0] >> 16 for v in values]
        return struct.pack("<%dH" % len(words), *words)
    raise ValueError(dtype)


def build(tensors, metadata, pad=True, order=None):
    """tensors: list of (name, dtype, shape, values), stored in list order."""
    header = {}
    if metadata is not None:
        header["__metadata__"] = metadata
    blobs = []
    pos = 0
    for name, dtype, shape, values in tensors:
        blob = encode(dtype, values)
        header[name] = {"dtype": dtype, "shape": shape, "data_offsets": [pos, pos + len(blob)]}
        pos += len(blob)
        blobs.append(blob)
    if order is not None:
        header = {k: header[k] for k in order}
    hb = json.dumps(header).encode("utf-8")
    if pad:
        hb += b" " * ((8 - (len(hb) % 8)) % 8)
    return struct.pack("<Q", len(hb)) + hb + b"".join(blobs)


SAMPLE = [
    # Stored in this order; the header lists them in another order (below).
    ("zeta.bias", "F32", [3], [0.5, -1.25, 3.0e-8]),
    ("alpha.weight", "F32", [2, 3], [1.0, -2.0, 0.1, 1e30, -1e-30, 7.0]),
    ("double", "F64", [2, 2], [0.1, -0.2, 1e-300, 3.5]),
    ("half", "F16", [4], [1.0, -0.5, 65504.0, 5.960464477539063e-08]),
    ("brain", "BF16", [2], [1.5, -3.0]),
    ("scalar", "F32", [], [42.0]),
    ("empty", "F32", [0, 4], []),
]
SAMPLE_META = {"family": "reference", "note": "written by safetensors_ref.py", "unicode": "\u00e9\u2192"}


def write(path):
    order = ["__metadata__"] + sorted(t[0] for t in SAMPLE)
    data = build(SAMPLE, SAMPLE_META, order=order)
    with open(path, "wb") as f:
        f.write(data)
    return read(path)


def bad(folder):
    """Malformed variants, each against one rule of the format."""
    good = [("a", "F32", [2], [1.0, 2.0]), ("b", "F32", [1], [3.0])]
    cases = {}

    def raw(header_obj, buf, length=None):
        hb = json.dumps(header_obj).encode("utf-8")
        n = len(hb) if length is None else length
        return struct.pack("<Q", n) + hb + buf

    buf = struct.pack("<3f", 1.0, 2.0, 3.0)
    cases["short"] = b"\x01\x02\x03"
    cases["header_beyond_file"] = raw({"a": {"dtype": "F32", "shape": [1], "data_offsets": [0, 4]}}, b"", length=1000)
    cases["header_huge"] = struct.pack("<Q", 1 << 40) + b"{}"
    cases["not_object"] = raw([1, 2], b"")
    cases["overlap"] = raw({"a": {"dtype": "F32", "shape": [2], "data_offsets": [0, 8]},
                            "b": {"dtype": "F32", "shape": [2], "data_offsets": [4, 12]}}, buf)
    cases["gap"] = raw({"a": {"dtype": "F32", "shape": [1], "data_offsets": [0, 4]},
                        "b": {"dtype": "F32", "shape": [1], "data_offsets": [8, 12]}}, buf)
    cases["trailing_data"] = raw({"a": {"dtype": "F32", "shape": [2], "data_offsets": [0, 8]}}, buf)
    cases["past_end"] = raw({"a": {"dtype": "F32", "shape": [4], "data_offsets": [0, 16]}}, buf)
    cases["shape_mismatch"] = raw({"a": {"dtype": "F32", "shape": [2, 2], "data_offsets": [0, 12]}}, buf)
    cases["bad_dtype"] = raw({"a": {"dtype": "Q7", "shape": [3], "data_offsets": [0, 12]}}, buf)
    cases["int_dtype"] = raw({"a": {"dtype": "I32", "shape": [3], "data_offsets": [0, 12]}}, buf)
    cases["nan"] = raw({"a": {"dtype": "F32", "shape": [3], "data_offsets": [0, 12]}},
                       struct.pack("<3f", 1.0, float("nan"), 3.0))
    cases["inf"] = raw({"a": {"dtype": "F32", "shape": [3], "data_offsets": [0, 12]}},
                       struct.pack("<3f", 1.0, float("inf"), 3.0))
    cases["negative_dim"] = raw({"a": {"dtype": "F32", "shape": [-3], "data_offsets": [0, 12]}}, buf)
    cases["meta_not_string"] = raw({"__metadata__": {"k": 1},
                                    "a": {"dtype": "F32", "shape": [3], "data_offsets": [0, 12]}}, buf)
    hb = b'{"a":{"dtype":"F32","shape":[3],"data_offsets":[0,12]},"a":{"dtype":"F32","shape":[3],"data_offsets":[0,12]}}'
    cases["duplicate_name"] = struct.pack("<Q", len(hb)) + hb + buf
    cases["missing_offsets"] = raw({"a": {"dtype": "F32", "shape": [3]}}, buf)
    os.makedirs(folder, exist_ok=True)
    for name, data in cases.items():
        with open(os.path.join(folder, name + ".safetensors"), "wb") as f:
            f.write(data)
    # The good file beside them shows the helper itself writes valid files.
    with open(os.path.join(folder, "good.safetensors"), "wb") as f:
        f.write(build(good, None))
    return {"format": 1, "bad": sorted(cases), "good": ["good"]}


def half_table():
    """For each of the 65536 binary16 patterns, the float32 bit pattern of
    its value (via struct's 'e' format), or null for NaN."""
    out = []
    for h in range(1 << 16):
        (v,) = struct.unpack("<e", struct.pack("<H", h))
        out.append(None if math.isnan(v) else struct.unpack("<I", struct.pack("<f", v))[0])
    return {"format": 1, "half_to_f32_bits": out}


def main():
    if len(sys.argv) != 3 or sys.argv[1] not in ("read", "write", "bad", "half"):
        sys.stderr.write(__doc__)
        sys.exit(2)
    cmd, arg = sys.argv[1], sys.argv[2]
    if cmd == "read":
        result = read(arg)
    elif cmd == "write":
        result = write(arg)
    elif cmd == "half":
        json.dump(half_table(), sys.stdout, separators=(",", ":"))
        sys.stdout.write("\n")
        return
    else:
        result = bad(arg)
    json.dump(result, sys.stdout, indent=1, sort_keys=True)
    sys.stdout.write("\n")


if __name__ == "__main__":
    main()
