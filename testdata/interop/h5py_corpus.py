"""Write H5MD 1.1 files the way other writers may, each valid under the
H5MD 1.1 specification (nongnu.org/h5md/h5md.html) and its units module,
for validate's tests of the h5md profile. Written with h5py only.

Usage: python3 h5py_corpus.py OUTDIR
Writes:
  fixed_strings.h5   fixed-length ASCII strings, explicit-mode clock, two
                     particle groups, a periodic box with edges [D], no
                     species, H5MD 1.1
  vlen_fixed_clock.h5  variable-length strings, fixed-mode clock (scalar
                     step/time with offset), a time-dependent periodic box
                     sharing position's step/time (hard links), no species
                     and no masses
  h5md_1_0.h5        H5MD 1.0: time required in every element, no units
                     module and no units (the specification does not
                     require them)
"""
import os
import sys

import h5py
import numpy as np

out = sys.argv[1]
rng = np.random.default_rng(11)


def fixed(s):
    # A fixed-length, null-terminated ASCII string (numpy bytes).
    return np.bytes_(s)


def header(f, string, version=(1, 1), units=True):
    h = f.create_group("h5md")
    h.attrs["version"] = np.array(version, dtype="i4")
    a = h.create_group("author")
    a.attrs["name"] = string("A. Writer")
    a.attrs["email"] = string("a.writer@example.org")
    c = h.create_group("creator")
    c.attrs["name"] = string("corpus script")
    c.attrs["version"] = string("1.0")
    if units:
        u = h.create_group("modules/units")
        u.attrs["version"] = np.array([1, 0], dtype="i4")
        u.attrs["system"] = string("SI")


def explicit(group, name, values, steps, times, unit, string, time_unit="ps"):
    e = group.create_group(name)
    e["step"] = np.asarray(steps, dtype="i8")
    e["time"] = np.asarray(times, dtype="f8")
    if time_unit:
        e["time"].attrs["unit"] = string(time_unit)
    e["value"] = values
    if unit:
        e["value"].attrs["unit"] = string(unit)
    return e


# 1. Fixed-length strings, explicit clock, two particle groups, periodic box.
T = 6
steps = np.arange(T) * 100
times = steps * 0.002
with h5py.File(os.path.join(out, "fixed_strings.h5"), "w") as f:
    header(f, fixed)
    for name, n in (("protein", 4), ("solvent", 6)):
        g = f.create_group("particles/" + name)
        box = g.create_group("box")
        box.attrs["dimension"] = np.int32(3)
        box.attrs["boundary"] = np.array([b"periodic"] * 3, dtype="S8")
        box["edges"] = np.array([3.1, 3.1, 3.1])
        box["edges"].attrs["unit"] = fixed("nm")
        explicit(g, "position", 3.1 * rng.random((T, n, 3)), steps, times, "nm", fixed)
        explicit(g, "velocity", rng.standard_normal((T, n, 3)), steps, times, "nm ps-1", fixed)
        g["mass"] = np.full(n, 12.011)
        g["mass"].attrs["unit"] = fixed("u")
    obs = f.create_group("observables")
    explicit(obs, "potential_energy", -1000 + rng.standard_normal(T), steps, times, "kJ mol-1", fixed)
    explicit(obs, "temperature", 300 + rng.standard_normal(T), steps, times, "K", fixed)

# 2. Variable-length strings, fixed-mode clock, time-dependent box.
T, n = 8, 5
with h5py.File(os.path.join(out, "vlen_fixed_clock.h5"), "w") as f:
    header(f, str)
    g = f.create_group("particles/fluid")
    box = g.create_group("box")
    box.attrs["dimension"] = np.int32(3)
    box.attrs["boundary"] = ["periodic", "periodic", "none"]
    pos = g.create_group("position")
    pos["step"] = np.int64(50)
    pos["step"].attrs["offset"] = np.int64(1000)
    pos["time"] = 0.1
    pos["time"].attrs["offset"] = 2.0
    pos["time"].attrs["unit"] = "ps"
    pos["value"] = 2.0 * rng.random((T, n, 3))
    pos["value"].attrs["unit"] = "nm"
    edges = box.create_group("edges")
    edges["step"] = pos["step"]  # the same objects: hard links
    edges["time"] = pos["time"]
    edges["value"] = 2.0 + 0.01 * rng.standard_normal((T, 3))
    edges["value"].attrs["unit"] = "nm"
    frc = g.create_group("force")
    frc["step"] = pos["step"]
    frc["time"] = pos["time"]
    frc["value"] = rng.standard_normal((T, n, 3))
    frc["value"].attrs["unit"] = "kJ mol-1 nm-1"

# 3. H5MD 1.0 without units.
T, n = 4, 2
steps = np.arange(T)
with h5py.File(os.path.join(out, "h5md_1_0.h5"), "w") as f:
    header(f, str, version=(1, 0), units=False)
    g = f.create_group("particles/all")
    box = g.create_group("box")
    box.attrs["dimension"] = np.int32(2)
    box.attrs["boundary"] = ["none", "none"]
    explicit(g, "position", rng.random((T, n, 2)), steps, steps * 0.5, None, str, time_unit=None)
