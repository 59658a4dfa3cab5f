"""Baseline for `muarc deidentify`: h5py copies every object (groups,
datasets with their filters, attributes) of each *.h5 file under SRC into a
new file under DST (Debian python3-h5py)."""
import os
import sys

import h5py

src, dst = sys.argv[1], sys.argv[2]
n = 0
for dirpath, dirnames, filenames in os.walk(src):
    dirnames[:] = sorted(d for d in dirnames if not d.startswith("."))
    for name in sorted(filenames):
        if not name.endswith(".h5") or name.startswith("."):
            continue
        rel = os.path.relpath(os.path.join(dirpath, name), src)
        out = os.path.join(dst, rel)
        os.makedirs(os.path.dirname(out), exist_ok=True)
        with h5py.File(os.path.join(dirpath, name), "r") as i, h5py.File(out, "w") as o:
            for k in i.attrs:
                o.attrs[k] = i.attrs[k]
            for k in i:
                i.copy(i[k], o, name=k)
        n += 1
print(n, "files")
