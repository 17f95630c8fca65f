"""Read an H5MD file with a common Python analysis library's H5MD reader
(the Debian package listed in .ci/deps.sh; unit conversion on, as the
library's universe object does) and with plain h5py, and print what they
return as JSON, for trajvault's interop tests.

Usage: python3 mda_read.py FILE.h5
Output: {"mda_version", "base_units": the library's own units,
         "file_units": the units the reader understood,
         "frames": [{"time", "positions", "velocities", "forces"}],
         "universe_frames": frames seen through the universe object,
         "h5py_unit_types": {path: Python type name of the unit attribute}}
"""
import json
import sys
import warnings

warnings.simplefilter("ignore")

import h5py  # noqa: E402
import MDAnalysis as analysis  # noqa: E402
from MDAnalysis.coordinates.H5MD import H5MDReader  # noqa: E402
from MDAnalysis.units import MDANALYSIS_BASE_UNITS as BASE_UNITS  # noqa: E402

path = sys.argv[1]
# The library (2.4) holds coordinates as float32 (hard-wired,
# see its docstring); time is a Python float.
r = H5MDReader(path, convert_units=True)
frames = []
for ts in r:
    fr = {"time": float(ts.time)}
    if ts.has_positions:
        fr["positions"] = ts.positions.astype(float).ravel().tolist()
    if ts.has_velocities:
        fr["velocities"] = ts.velocities.astype(float).ravel().tolist()
    if ts.has_forces:
        fr["forces"] = ts.forces.astype(float).ravel().tolist()
    fr["observables"] = sorted(ts.data.keys())
    frames.append(fr)
units = dict(r.units)
n_atoms = r.n_atoms
r.close()

# The same file through a Universe, as users open a trajectory whose
# topology comes from elsewhere.
u = analysis.Universe.empty(n_atoms, trajectory=True)
u.load_new(path, format="H5MD")
universe_frames = len(u.trajectory)

types = {}
with h5py.File(path, "r") as f:
    def visit(name, obj):
        if "unit" in obj.attrs:
            types["/" + name] = type(obj.attrs["unit"]).__name__
    f.visititems(visit)
    types["/h5md/author@name"] = type(f["h5md/author"].attrs["name"]).__name__

json.dump({
    "mda_version": analysis.__version__,
    "base_units": {k: BASE_UNITS[k] for k in ("length", "time", "speed", "force")},
    "file_units": units,
    "frames": frames,
    "universe_frames": universe_frames,
    "h5py_unit_types": types,
}, sys.stdout)
