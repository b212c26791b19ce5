#!/usr/bin/python3
"""An independent safetensors reader and writer for convtag's format tests.

It follows the format's published specification (the safetensors project's
README, "Format" section) by itself: an 8-byte little-endian unsigned header
length N, N bytes of UTF-8 JSON mapping tensor names to dtype, shape and
[begin, end) data offsets plus an optional "__metadata__" map of strings, then
the data buffer. Only the standard library and numpy are used: numpy's
frombuffer reads each tensor. (The safetensors Python package is not packaged
by Debian, so this script stands in for it.)

  safetensors_check.py read FILE    print a JSON digest of FILE
  safetensors_check.py write FILE   write a container of seeded random
                                    tensors, unpadded and out of order, and
                                    print its digest

The digest is {"alignment", "checksum", "metadata", "tensors": [{"name",
"dtype", "shape", "sum", "sha256"}]} with tensors in header order, sum the
float64 sum of the values (bytes for U8) and sha256 the hex digest of the
tensor's bytes.
"""

import hashlib
import json
import struct
import sys

import numpy as np

# dtype names of the specification and their little-endian numpy types.
DTYPES = {
    "BOOL": "?", "U8": "u1", "I8": "i1", "I16": "<i2", "U16": "<u2",
    "F16": "<f2", "I32": "<i4", "U32": "<u4", "F32": "<f4",
    "I64": "<i8", "U64": "<u8", "F64": "<f8",
}


def no_duplicates(pairs):
    keys = [k for k, _ in pairs]
    if len(keys) != len(set(keys)):
        raise ValueError("duplicate key in header")
    return dict(pairs)


def digest(raw):
    (n,) = struct.unpack("<Q", raw[:8])
    if n > len(raw) - 8:
        raise ValueError("header length past the end of the file")
    header = json.loads(raw[8:8 + n].decode("utf-8"), object_pairs_hook=no_duplicates)
    data = raw[8 + n:]
    meta = header.pop("__metadata__", {})
    if not all(isinstance(v, str) for v in meta.values()):
        raise ValueError("metadata values must be strings")
    # The byte ranges must tile the data buffer: no hole, no overlap.
    at = 0
    for begin, end, name in sorted((v["data_offsets"][0], v["data_offsets"][1], k) for k, v in header.items()):
        if begin != at:
            raise ValueError("tensor %r starts at %d, expected %d" % (name, begin, at))
        at = end
    if at != len(data):
        raise ValueError("tensors end at %d, data buffer has %d bytes" % (at, len(data)))
    tensors = []
    for name, info in header.items():
        begin, end = info["data_offsets"]
        dt = np.dtype(DTYPES[info["dtype"]])
        count = 1
        for d in info["shape"]:
            count *= d
        if count * dt.itemsize != end - begin:
            raise ValueError("tensor %r: shape does not match its byte range" % name)
        arr = np.frombuffer(data, dtype=dt, count=count, offset=begin).reshape(info["shape"])
        tensors.append({
            "name": name,
            "dtype": info["dtype"],
            "shape": list(arr.shape),
            "sum": float(arr.astype(np.float64).sum()),
            "sha256": hashlib.sha256(arr.tobytes()).hexdigest(),
        })
    return {
        "alignment": (8 + n) % 8,
        "checksum": "sha256:" + hashlib.sha256(data).hexdigest(),
        "metadata": meta,
        "tensors": tensors,
    }


def write(path):
    rng = np.random.default_rng(20260101)
    arrays = [
        ("weights", rng.standard_normal((3, 5)).astype("<f4")),
        ("half", rng.standard_normal(7).astype("<f2")),
        ("counts", rng.integers(-1000, 1000, 4).astype("<i8")),
        ("bytes", rng.integers(0, 256, 5).astype("u1")),
        ("ids", rng.integers(-5, 5, (2, 2)).astype("<i4")),
    ]
    # Packed in list order, but listed in the header in reverse, with no
    # padding: the data buffer is not 8-byte aligned.
    header, chunks, at = {}, [], 0
    for name, arr in arrays:
        b = arr.tobytes()
        header[name] = {"dtype": {"<f4": "F32", "<f2": "F16", "<i8": "I64", "|u1": "U8", "<i4": "I32"}[arr.dtype.str],
                        "shape": list(arr.shape), "data_offsets": [at, at + len(b)]}
        chunks.append(b)
        at += len(b)
    ordered = {"__metadata__": {"writer": "numpy reference"}}
    for name in reversed(list(header)):
        ordered[name] = header[name]
    h = json.dumps(ordered, separators=(",", ":")).encode("utf-8")
    if (8 + len(h)) % 8 == 0:
        h += b" "  # keep the buffer unaligned, which readers must accept
    raw = struct.pack("<Q", len(h)) + h + b"".join(chunks)
    with open(path, "wb") as f:
        f.write(raw)
    return raw


def main():
    if len(sys.argv) != 3 or sys.argv[1] not in ("read", "write"):
        sys.exit("usage: safetensors_check.py read|write FILE")
    if sys.argv[1] == "write":
        raw = write(sys.argv[2])
    else:
        with open(sys.argv[2], "rb") as f:
            raw = f.read()
    json.dump(digest(raw), sys.stdout, sort_keys=True)
    sys.stdout.write("\n")


if __name__ == "__main__":
    main()
