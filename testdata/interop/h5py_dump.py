"""Dump an HDF5 file's structure and a SHA-256 of every dataset's bytes as
JSON, using h5py (Debian python3-h5py) as an independent reader.

Usage: python3 h5py_dump.py FILE.h5
"""
import hashlib
import json
import sys

import h5py
import numpy as np


def value(v):
    if isinstance(v, bytes):
        return v.decode()
    if isinstance(v, np.ndarray):
        return [value(x) for x in v.tolist()]
    if isinstance(v, list):
        return [value(x) for x in v]
    if isinstance(v, np.generic):
        return v.item()
    return v


def attrs(obj):
    return {k: value(obj.attrs[k]) for k in sorted(obj.attrs.keys())}


def walk(group, prefix, out):
    out[prefix or "/"] = {"kind": "group", "attrs": attrs(group)}
    for name in sorted(group.keys()):
        path = prefix + "/" + name
        obj = group[name]
        if isinstance(obj, h5py.Group):
            walk(obj, path, out)
        else:
            data = obj[()]
            raw = np.asarray(data, dtype=obj.dtype.newbyteorder("<")).tobytes()
            out[path] = {
                "kind": "dataset",
                "dtype": obj.dtype.name,
                "shape": list(obj.shape),
                "maxshape": [-1 if m is None else m for m in (obj.maxshape or [])],
                "sha256": hashlib.sha256(raw).hexdigest(),
                "attrs": attrs(obj),
            }


out = {}
with h5py.File(sys.argv[1], "r") as f:
    walk(f, "", out)
json.dump({"h5py": h5py.__version__, "hdf5": h5py.version.hdf5_version, "objects": out}, sys.stdout, sort_keys=True)
