"""rewrite_samples.py FILE DATASET DTYPE [OPTIONS_JSON]: rewrites one
dataset of FILE in place with h5py (Debian python3-h5py), as another tool
would: the same values converted to DTYPE (a numpy type string such as
">f4"), stored with the h5py create_dataset keyword arguments in
OPTIONS_JSON (chunks, shuffle, compression, compression_opts, fletcher32;
none: contiguous), and the same attributes."""
import json
import sys

import h5py

path, name, dtype = sys.argv[1], sys.argv[2], sys.argv[3]
kw = json.loads(sys.argv[4]) if len(sys.argv) > 4 else {}
if "chunks" in kw:
    kw["chunks"] = tuple(kw["chunks"])
with h5py.File(path, "r+") as f:
    d = f[name]
    data, attrs, maxshape = d[...], dict(d.attrs), d.maxshape
    del f[name]
    n = f.create_dataset(name, data=data.astype(dtype), maxshape=maxshape if "chunks" in kw else None, **kw)
    for k, v in attrs.items():
        n.attrs[k] = v
