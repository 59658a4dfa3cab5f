"""Baseline for `muarc index`: h5py opens every *.h5 file under a folder and
reads its root attributes (Debian python3-h5py)."""
import os
import sys

import h5py

n = 0
for dirpath, dirnames, filenames in os.walk(sys.argv[1]):
    dirnames[:] = sorted(d for d in dirnames if not d.startswith("."))
    for name in sorted(filenames):
        if name.endswith(".h5") and not name.startswith("."):
            with h5py.File(os.path.join(dirpath, name), "r") as f:
                attrs = {k: f.attrs[k] for k in f.attrs}
            n += 1
print(n, "files")
