"""Write a small MD-like trajectory as extended XYZ with ASE (Debian
python3-ase), then read it back with ASE and print what ASE reports, as
JSON: positions, velocities, forces and potential energy per frame.

Usage: python3 ase_extxyz.py OUT.xyz
"""
import json
import sys

import ase
import numpy as np
from ase import Atoms
from ase.calculators.singlepoint import SinglePointCalculator
from ase.io import read, write

rng = np.random.default_rng(5)
frames = []
base = np.array([[0.0, 0.0, 0.1173], [0.0, 0.7572, -0.4692], [0.0, -0.7572, -0.4692]])
for i in range(12):
    a = Atoms("OH2", positions=base + 0.01 * rng.standard_normal((3, 3)))
    a.set_velocities(0.01 * rng.standard_normal((3, 3)))
    a.calc = SinglePointCalculator(a, energy=-2080.0 + rng.standard_normal(),
                                   forces=rng.standard_normal((3, 3)))
    frames.append(a)
write(sys.argv[1], frames, format="extxyz")

out = []
for a in read(sys.argv[1], index=":", format="extxyz"):
    out.append({
        "positions": a.get_positions().tolist(),
        "velocities": a.get_velocities().tolist(),
        "forces": a.get_forces().tolist(),
        "energy": a.get_potential_energy(),
        "masses": a.get_masses().tolist(),
    })
json.dump({"ase": ase.__version__, "frames": out}, sys.stdout)
