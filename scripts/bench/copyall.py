"""Baseline for `muarc deidentify`: h5py copies every object (groups,
datasets with their filters, attributes) of each *.h5 file under SRC into a
new file under DST (Debian python3-h5py)."""
import os
import sys

import h5py

from h5walk import recordings

src, dst = sys.argv[1], sys.argv[2]
n = 0
for path in recordings(src):
    out = os.path.join(dst, os.path.relpath(path, src))
    os.makedirs(os.path.dirname(out), exist_ok=True)
    with h5py.File(path, "r") as i, h5py.File(out, "w") as o:
        for k in i.attrs:
            o.attrs[k] = i.attrs[k]
        for k in i:
            i.copy(i[k], o, name=k)
    n += 1
print(n, "files")
