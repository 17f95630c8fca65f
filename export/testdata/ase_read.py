"""Read an extended XYZ file with ase.io.read (Debian python3-ase) and
print, as JSON, what ASE reports for every frame: positions, momenta,
velocities, masses, forces and the potential energy (each float as
Python's repr, so the numbers read back bit for bit).

Usage: python3 ase_read.py FILE.extxyz
"""
import json
import sys

from ase.io import read

res = []
for a in read(sys.argv[1], index=":", format="extxyz"):
    res.append({
        "positions": a.get_positions().tolist(),
        "momenta": a.get_momenta().tolist(),
        "velocities": a.get_velocities().tolist(),
        "masses": a.get_masses().tolist(),
        "forces": a.get_forces().tolist(),
        "energy": a.get_potential_energy(),
        "kinetic": a.get_kinetic_energy(),
    })
json.dump({"frames": res}, sys.stdout)
