"""Breaks one shape of a valid trajectory file, with h5py (an independent
writer), for trajfile's TestReaderRefusesBadShapes (issue 12: shapes the
validator let through made audit and export panic).

usage: badshapes.py FILE CASE
"""
import sys

import h5py
import numpy as np

path, case = sys.argv[1], sys.argv[2]
P = "/particles/all"
f = h5py.File(path, "r+")


def recreate(name, data=None, shape=None, dtype="f8", chunks=None):
    """Replaces dataset name, keeping its attributes."""
    attrs = dict(f[name].attrs)
    del f[name]
    if data is not None:
        d = f.create_dataset(name, data=data)
    else:
        d = f.create_dataset(name, shape=shape, dtype=dtype, chunks=chunks, maxshape=tuple(None for _ in shape) if chunks else None)
    for k, v in attrs.items():
        d.attrs[k] = v


def clock(el, n):
    """Gives element el its own explicit clock of n frames."""
    for part, dt in (("step", "i8"), ("time", "f8")):
        name = el + "/" + part
        attrs = dict(f[name].attrs)
        del f[name]
        d = f.create_dataset(name, data=np.arange(n, dtype=dt))
        for k, v in attrs.items():
            d.attrs[k] = v


T = f[P + "/position/value"].shape[0]
if case == "n_states_negative":
    recreate("/parameters/n_states", data=np.int32(-5))
elif case == "n_states_huge":
    recreate("/parameters/n_states", data=np.int32(2**31 - 1))
elif case == "n_states_3_two_columns":
    recreate("/parameters/n_states", data=np.int32(3))
elif case == "zero_frames":
    for el in ("position", "velocity", "force"):
        recreate(P + "/" + el + "/value", shape=(0, 3, 3), chunks=(1, 3, 3))
    clock(P + "/position", 0)
elif case == "one_frame":
    for el in ("position", "velocity", "force"):
        v = f[P + "/" + el + "/value"][:1]
        recreate(P + "/" + el + "/value", data=v)
    clock(P + "/position", 1)
elif case == "total_energy_short":
    v = f["/observables/total_energy/value"][: T - 1]
    recreate("/observables/total_energy/value", data=v)
elif case == "position_scalar":
    recreate(P + "/position/value", data=np.float64(1.0))
elif case == "species_rank5":
    recreate(P + "/species", data=np.ones((3, 1, 1, 1, 1), dtype="i4"))
elif case == "frames_2_40":
    # 2^40 declared frames of an unwritten chunked dataset: a few KB on
    # disk, 2^40 * 72 bytes if trusted. Fixed-mode clock (H5MD 1.1).
    recreate(P + "/position/value", shape=(2**40, 3, 3), chunks=(1, 3, 3))
    for part, v in (("step", np.int64(1)), ("time", np.float64(1.0))):
        name = P + "/position/" + part
        attrs = dict(f[name].attrs)
        del f[name]
        d = f.create_dataset(name, data=v)
        for k, a in attrs.items():
            d.attrs[k] = a
        d.attrs["offset"] = v * 0
elif case == "populations_rank3":
    recreate("/observables/populations/value", data=np.zeros((T, 2, 2)))
else:
    sys.exit("unknown case " + case)
f.close()
