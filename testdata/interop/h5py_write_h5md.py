"""Write a small, valid H5MD 1.1 file the way general-purpose tools do:
with h5py's defaults (variable-length UTF-8 strings), fixed-mode
step/time, single precision and h5py's own LZF filter on one dataset.
Used by validate's tests to check that foreign files validate fairly.

Usage: python3 h5py_write_h5md.py OUT.h5
"""
import sys

import h5py
import numpy as np

T, N = 20, 3
rng = np.random.default_rng(7)
with h5py.File(sys.argv[1], "w") as f:
    h = f.create_group("h5md")
    h.attrs["version"] = np.array([1, 1], dtype="i4")
    a = h.create_group("author")
    a.attrs["name"] = "Foreign Writer"  # h5py: variable-length string
    c = h.create_group("creator")
    c.attrs["name"] = "a general-purpose script"
    c.attrs["version"] = "0.1"
    u = h.create_group("modules/units")
    u.attrs["version"] = np.array([1, 0], dtype="i4")
    u.attrs["system"] = "SI"

    p = f.create_group("particles/water")
    box = p.create_group("box")
    box.attrs["dimension"] = np.int32(3)
    box.attrs["boundary"] = ["none", "none", "none"]
    pos = p.create_group("position")
    pos["step"] = np.int64(10)  # fixed mode: one frame every 10 steps
    pos["step"].attrs["offset"] = np.int64(0)
    pos["time"] = 0.005
    pos["time"].attrs["unit"] = "ps"
    pos["time"].attrs["offset"] = 0.0
    xyz = np.array([[0.0, 0.0, 0.0], [0.0957, 0.0, 0.0], [-0.024, 0.0927, 0.0]])
    frames = xyz + 0.001 * rng.standard_normal((T, N, 3))
    v = pos.create_dataset("value", data=frames.astype("f4"), maxshape=(None, N, 3),
                           chunks=(5, N, 3), compression="lzf")
    v.attrs["unit"] = "nm"
    p["species"] = np.array([8, 1, 1], dtype="i4")
    p["mass"] = np.array([15.999, 1.008, 1.008])
    p["mass"].attrs["unit"] = "u"

    e = f.create_group("observables/potential_energy")
    e["step"] = pos["step"]  # hard links to position's clock
    e["time"] = pos["time"]
    ev = e.create_dataset("value", data=-200000.0 + rng.standard_normal(T))
    ev.attrs["unit"] = "kJ mol-1"
