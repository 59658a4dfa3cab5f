"""Baseline for `muarc index`: h5py opens every *.h5 file under a folder and
reads its root attributes (Debian python3-h5py)."""
import sys

import h5py

from h5walk import recordings

n = 0
for path in recordings(sys.argv[1]):
    with h5py.File(path, "r") as f:
        attrs = {k: f.attrs[k] for k in f.attrs}
    n += 1
print(n, "files")
