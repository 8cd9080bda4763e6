#!/usr/bin/python3
"""Reads a flyby record with h5py alone, following docs/record-format.md, checks every invariant
listed there and prints a JSON summary (tag count, per-channel counts, first/last time, a checksum
of all times) for the C++ test to compare against what it wrote. Exit status 1 on a violation.

Usage: record_h5py_check.py RUN.h5
"""
import json
import sys

import h5py
import numpy as np


def fail(msg):
    print("layout violation: " + msg)
    sys.exit(1)


def as_str(x):
    return x.decode("utf-8") if isinstance(x, bytes) else str(x)


def want(dset, kind, size, name):
    if dset.dtype.kind != kind or dset.dtype.itemsize != size:
        fail(f"{name} has dtype {dset.dtype}, expected kind {kind} size {size}")
    if dset.ndim != 1:
        fail(f"{name} is not 1-D")


def main(path):
    with h5py.File(path, "r") as f:
        a = f.attrs
        if as_str(a["format"]) != "flyby-time-tags":
            fail("format")
        if a["format_version"].dtype != np.uint32 or int(a["format_version"]) != 1:
            fail("format_version")
        if a["complete"].dtype != np.uint8 or int(a["complete"]) != 1:
            fail("complete")
        for key, dt in [("tag_count", np.uint64), ("resolution_ps", np.float64),
                        ("start_ps", np.int64), ("duration_ps", np.int64)]:
            if a[key].dtype != dt:
                fail(f"@{key} has dtype {a[key].dtype}")
        n = int(a["tag_count"])
        start, dur = int(a["start_ps"]), int(a["duration_ps"])
        if not (a["resolution_ps"] > 0) or dur < 0:
            fail("resolution or duration")

        t, c = f["tags/time_ps"], f["tags/channel"]
        want(t, "i", 8, "/tags/time_ps")
        want(c, "u", 1, "/tags/channel")
        if t.shape[0] != n or c.shape[0] != n:
            fail("tag dataset lengths")

        g = f["channels"]
        want(g["id"], "u", 1, "/channels/id")
        want(g["tag_count"], "u", 8, "/channels/tag_count")
        ids = [int(x) for x in g["id"][()]]
        names = [as_str(x) for x in g["name"][()]]
        roles = [as_str(x) for x in g["role"][()]]
        stored = [int(x) for x in g["tag_count"][()]]
        m = len(ids)
        if not (len(names) == len(roles) == len(stored) == m) or m > 256:
            fail("channel table lengths")
        if len(set(ids)) != m or len(set(names)) != m:
            fail("duplicate channel id or name")
        allowed = set("ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789_.+-")
        for nm in names:
            if not (1 <= len(nm) <= 64) or not set(nm) <= allowed:
                fail(f"channel name {nm!r}")
        if not set(roles) <= {"detector", "herald", "marker"}:
            fail("role")
        if sum(stored) != n:
            fail("sum of /channels/tag_count")

        idx = f["index/time_ps"]
        want(idx, "i", 8, "/index/time_ps")
        b = int(idx.attrs["block_tags"])
        if idx.attrs["block_tags"].dtype != np.uint64 or not (1 <= b <= 1 << 24):
            fail("block_tags")
        if idx.shape[0] != (n + b - 1) // b:
            fail("index length")
        index = idx[()]

        counts = np.zeros(256, dtype=np.int64)
        checksum = 0
        prev = None
        first = last = None
        block = 1 << 18
        for i in range(0, n, block):
            tt = t[i:i + block]
            cc = c[i:i + block]
            if np.any(np.diff(tt) < 0) or (prev is not None and tt[0] < prev):
                fail("times not sorted")
            if tt[0] < start or tt[-1] - start >= dur:
                fail("tag outside window")
            ks = np.arange(i, i + len(tt))
            on = ks % b == 0
            if not np.array_equal(index[ks[on] // b], tt[on]):
                fail("index entry mismatch")
            counts += np.bincount(cc, minlength=256)
            checksum = (checksum + int(np.sum(tt.astype(np.uint64) % np.uint64(1000003), dtype=np.uint64))) % (1 << 61)
            if first is None:
                first = int(tt[0])
            prev = int(tt[-1])
            last = prev
        for cid in range(256):
            if counts[cid] and cid not in ids:
                fail(f"channel id {cid} not in table")
        for cid, s in zip(ids, stored):
            if counts[cid] != s:
                fail(f"stored count of channel {cid}")

        p = f["provenance"].attrs
        print(json.dumps({
            "tag_count": n,
            "channels": [{"id": i, "name": nm, "role": r, "count": int(counts[i])}
                         for i, nm, r in zip(ids, names, roles)],
            "first_ps": first, "last_ps": last, "start_ps": start, "duration_ps": dur,
            "resolution_ps": float(a["resolution_ps"]),
            "time_checksum": checksum,
            "seed": int(p["seed"]) if "seed" in p else None,
            "config_text": as_str(p["config_text"]),
            "source": as_str(p["source"]),
        }, sort_keys=True))


if __name__ == "__main__":
    main(sys.argv[1])
