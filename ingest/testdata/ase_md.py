"""Run a short NVE molecular dynamics of a small copper cluster with ASE's
EMT calculator and velocity Verlet (Debian python3-ase), writing what an
MD user keeps: an extended XYZ trajectory with momenta, forces, energy,
step and time (ase.io.write, format="extxyz"; with tags and the
calculator's per-atom energies, columns no quantity names), and an energy table
printed with %.10f. Then read the trajectory back with ase.io.read and
print what ASE reports, as JSON.

Usage: python3 ase_md.py DIR [FRAMES]
"""
import json
import os
import sys

import ase
import numpy as np
from ase import units
from ase.calculators.emt import EMT
from ase.cluster import Icosahedron
from ase.io import read, write
from ase.md.velocitydistribution import MaxwellBoltzmannDistribution
from ase.md.verlet import VelocityVerlet

out = sys.argv[1]
nframes = int(sys.argv[2]) if len(sys.argv) > 2 else 12
atoms = Icosahedron("Cu", 2)  # 13 atoms
atoms.set_tags([i % 3 for i in range(len(atoms))])  # an extxyz "tags" column
atoms.calc = EMT()
MaxwellBoltzmannDistribution(atoms, temperature_K=600, rng=np.random.default_rng(3))
dt_fs = 2.0
dyn = VelocityVerlet(atoms, dt_fs * units.fs)
xyz = os.path.join(out, "traj.xyz")
table = open(os.path.join(out, "energies.dat"), "w")
table.write("# step time[fs] epot[eV] ekin[eV] etot[eV]\n")
if os.path.exists(xyz):
    os.remove(xyz)


def record():
    step = dyn.nsteps
    atoms.info["step"] = step
    atoms.info["time"] = step * dt_fs
    epot = atoms.get_potential_energy()
    ekin = atoms.get_kinetic_energy()
    write(xyz, atoms, format="extxyz", append=True)
    table.write("%d %.3f %.10f %.10f %.10f\n" % (step, step * dt_fs, epot, ekin, epot + ekin))


dyn.attach(record, interval=1)  # also called once before the first step
dyn.run(nframes - 1)
table.close()

res = []
for a in read(xyz, index=":", format="extxyz"):
    res.append({
        "positions": a.get_positions().tolist(),
        "momenta": a.get_momenta().tolist(),
        "velocities": a.get_velocities().tolist(),
        "masses": a.get_masses().tolist(),
        "forces": a.get_forces().tolist(),
        "energy": a.get_potential_energy(),
        "kinetic": a.get_kinetic_energy(),
        "tags": a.get_tags().tolist(),
        "energies": a.get_potential_energies().tolist(),
        "step": int(a.info["step"]),
        "time": float(a.info["time"]),
    })
json.dump({"ase": ase.__version__, "fs": units.fs, "frames": res}, sys.stdout)
