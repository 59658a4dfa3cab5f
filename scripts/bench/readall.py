"""Like-for-like baseline for `muarc validate` on a folder: h5py opens every
*.h5 file under it and reads every dataset once, decoded (HDF5 undoes
shuffle + deflate and checks each chunk's Fletcher-32), and every attribute
of every object (Debian python3-h5py). This is the least a validator that
checks every stored value and checksum must read."""
import sys

import h5py

from h5walk import recordings


def read_object(name, obj):
    for k in obj.attrs:
        obj.attrs[k]
    if isinstance(obj, h5py.Dataset) and obj.shape != () and obj.size:
        step = obj.chunks[0] if obj.chunks else obj.shape[0]
        for start in range(0, obj.shape[0], step):
            obj[start:start + step]


n = 0
for path in recordings(sys.argv[1]):
    with h5py.File(path, "r") as f:
        for k in f.attrs:
            f.attrs[k]
        f.visititems(read_object)
    n += 1
print(n, "files")
