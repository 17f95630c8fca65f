"""Write an MD run the way Python MD toolkits keep one: an NVE run of a
copper icosahedron (Debian python3-ase: EMT calculator, velocity Verlet,
2 fs), every frame appended to an extended XYZ file with momenta, forces
and energy (per-atom reals printed %16.8f, energy= in Python's repr), and
an energy table printed with %.10f.

Usage: python3 ase_run.py DIR FRAMES SHELLS  (SHELLS 3: 55 atoms)
"""
import os
import sys

import numpy as np
from ase import units
from ase.calculators.emt import EMT
from ase.cluster import Icosahedron
from ase.io import write
from ase.md.velocitydistribution import MaxwellBoltzmannDistribution
from ase.md.verlet import VelocityVerlet

out, nframes, shells = sys.argv[1], int(sys.argv[2]), int(sys.argv[3])
atoms = Icosahedron("Cu", shells)
atoms.calc = EMT()
MaxwellBoltzmannDistribution(atoms, temperature_K=600, rng=np.random.default_rng(3))
dt_fs = 2.0
dyn = VelocityVerlet(atoms, dt_fs * units.fs)
xyz = open(os.path.join(out, "traj.xyz"), "w")
table = open(os.path.join(out, "energies.dat"), "w")
table.write("# step time[fs] epot[eV] ekin[eV] etot[eV]\n")


def record():
    step = dyn.nsteps
    atoms.info["step"] = step
    atoms.info["time"] = step * dt_fs
    epot = atoms.get_potential_energy()
    ekin = atoms.get_kinetic_energy()
    write(xyz, atoms, format="extxyz")
    table.write("%d %.3f %.10f %.10f %.10f\n" % (step, step * dt_fs, epot, ekin, epot + ekin))


dyn.attach(record, interval=1)  # also called once before the first step
dyn.run(nframes - 1)
xyz.close()
table.close()
