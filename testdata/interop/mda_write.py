"""Write an H5MD file with a common Python analysis library's H5MD writer
(the Debian package listed in .ci/deps.sh) from a small universe built
here: 5 atoms, 4 frames in memory, a periodic box, positions, velocities
and forces. For validate's tests of the h5md profile.

Usage: python3 mda_write.py OUT.h5
"""
import sys
import warnings

warnings.simplefilter("ignore")

import numpy as np  # noqa: E402
import MDAnalysis as analysis  # noqa: E402
from MDAnalysis.coordinates.memory import MemoryReader  # noqa: E402

n, T = 5, 4
rng = np.random.default_rng(3)
u = analysis.Universe.empty(n, trajectory=False)
u.load_new(
    20.0 * rng.random((T, n, 3)).astype("f4"),
    format=MemoryReader,
    velocities=rng.standard_normal((T, n, 3)).astype("f4"),
    forces=rng.standard_normal((T, n, 3)).astype("f4"),
    dimensions=np.tile([20.0, 20.0, 20.0, 90.0, 90.0, 90.0], (T, 1)).astype("f4"),
    dt=0.5,
)
# The library's own units; its writer stores them.
u.trajectory.units = {"time": "ps", "length": "Angstrom", "velocity": "Angstrom/ps",
                      "force": "kJ/(mol*Angstrom)"}
with analysis.Writer(sys.argv[1], n_atoms=n, format="H5MD", n_frames=T,
                       positions=True, velocities=True, forces=True) as w:
    for ts in u.trajectory:
        w.write(u.atoms)
