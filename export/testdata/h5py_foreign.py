"""Write an H5MD 1.1 file as a general-purpose writer might: positions
stored contiguously (no chunking) in single precision, the potential
energy in chunks of 3 frames with gzip, velocities in chunks of one frame,
fixed-mode step and time. Used to check that selections read files of
any chunking, or none.

Usage: python3 h5py_foreign.py OUT.h5
"""
import sys

import h5py
import numpy as np

T, N = 40, 4
rng = np.random.default_rng(3)
with h5py.File(sys.argv[1], "w") as f:
    h = f.create_group("h5md")
    h.attrs["version"] = np.array([1, 1], dtype="i4")
    f.create_group("h5md/author").attrs["name"] = "Foreign Writer"
    c = f.create_group("h5md/creator")
    c.attrs["name"] = "a general-purpose script"
    c.attrs["version"] = "0.1"
    p = f.create_group("particles/gas")
    pos = p.create_group("position")
    pos["step"] = np.int64(4)
    pos["step"].attrs["offset"] = np.int64(100)
    pos["time"] = 0.002
    pos["time"].attrs["unit"] = "ps"
    pos["time"].attrs["offset"] = 0.2
    v = pos.create_dataset("value", data=rng.standard_normal((T, N, 3)).astype("f4"))  # contiguous
    v.attrs["unit"] = "nm"
    vel = p.create_group("velocity")
    vel["step"] = pos["step"]
    vel["time"] = pos["time"]
    vv = vel.create_dataset("value", data=rng.standard_normal((T, N, 3)), chunks=(1, N, 3))
    vv.attrs["unit"] = "nm ps-1"
    p["species"] = np.array([18, 18, 10, 2], dtype="i4")
    p["mass"] = np.array([39.948, 39.948, 20.180, 4.0026])
    p["mass"].attrs["unit"] = "u"
    e = f.create_group("observables/potential_energy")
    e["step"] = pos["step"]
    e["time"] = pos["time"]
    ev = e.create_dataset("value", data=-50 + rng.standard_normal(T), chunks=(3,), compression="gzip")
    ev.attrs["unit"] = "kJ mol-1"
