"""Writes the hostile HDF5 corpus for internal/h5's tests into argv[1].

Each file is built with h5py so that its hostile part is made by an
independent writer; the Go test checks that reading gives a typed error.
"""
import os
import sys

import h5py
import numpy as np

out = sys.argv[1]


def path(name):
    return os.path.join(out, name)


# Declared shapes far beyond memory, with tiny chunks so the file stays
# small (no chunk is ever written: reads would be all fill value).
for name, shape, chunk in [
    ("huge_2p33.h5", (2**33, 2**31, 4), (1, 1, 4)),
    ("big_1e12.h5", (10**12, 3, 3), (1, 3, 3)),
    ("wrap_2p32.h5", (2**32 + 1, 2**32, 1), (1, 1, 1)),
    ("huge_2p62.h5", (2**62, 4, 3), (1, 4, 3)),
]:
    with h5py.File(path(name), "w", libver="earliest") as f:
        f.create_dataset("value", shape=shape, chunks=chunk, dtype="f4" if name == "huge_2p33.h5" else "f8")
        f["value"].attrs["units"] = "nm"

# External raw storage on a system file and on a FIFO (made by the test).
with h5py.File(path("ext_passwd.h5"), "w") as f:
    f.create_dataset("value", shape=(16,), dtype="f8", external=[("/etc/passwd", 0, 128)])
with h5py.File(path("ext_fifo.h5"), "w") as f:
    f.create_dataset("value", shape=(16,), dtype="f8", external=[("fifo", 0, 128)])

# External link to another file; the target is a FIFO (made by the test),
# so following it would hang.
with h5py.File(path("elink.h5"), "w") as f:
    g = f.create_group("particles")
    g["all"] = h5py.ExternalLink("fifo", "/particles/all")
    f["data"] = h5py.ExternalLink("other.h5", "/data")
    f["ok"] = np.arange(3.0)
with h5py.File(path("other.h5"), "w") as f:
    f["data"] = np.arange(4.0)

# A virtual dataset whose source is itself (same file, same name).
with h5py.File(path("vds_self.h5"), "w") as f:
    lay = h5py.VirtualLayout(shape=(4,), dtype="f8")
    lay[:] = h5py.VirtualSource(".", "/vds", shape=(4,))
    f.create_virtual_dataset("vds", lay, fillvalue=0)
# A virtual dataset whose source is another file beside it.
with h5py.File(path("vds_other.h5"), "w") as f:
    lay = h5py.VirtualLayout(shape=(4,), dtype="f8")
    lay[:] = h5py.VirtualSource("other.h5", "/data", shape=(4,))
    f.create_virtual_dataset("vds", lay, fillvalue=0)
