"""Storage baselines and checks for scripts/bench-storage.sh, on the raw
counts the generator wrote (little-endian int16, row-major, CHANNELS per
row). Run with Debian's /usr/bin/python3 (python3-h5py, python3-numpy).

  storage.py h5int COUNTS CHANNELS OUT.h5
      the plain-HDF5 integer baseline: int16 counts written by h5py with
      its defaults for a compressed dataset (chunks chosen by h5py, gzip
      level 4) and the shuffle filter
  storage.py size FILE.h5
      bytes/sample of FILE's dataset "samples" and its chunk shape
  storage.py samples FILE.h5 COUNTS CHANNELS LSB
      the samples muarc stored: type, bytes/sample of the dataset's storage,
      and the largest |stored physical value - count x LSB| (uV); physical
      = stored x scale_factor + add_offset when the dataset has them (CF)
  storage.py split COUNTS CHANNELS GROUP PREFIX
      the counts as CHANNELS/GROUP raw files of GROUP channels (for flac)
  storage.py sweep COUNTS CHANNELS OUT.h5
      built-in HDF5 filters on the int16 counts, one table row each:
      chunk shapes x deflate levels with shuffle, without shuffle, and
      scale-offset (integer, minimum bits found per chunk); every row with
      Fletcher-32 and read back to check nothing changed
"""
import sys
import time

import h5py
import numpy as np


def load(path, channels):
    return np.fromfile(path, dtype="<i2").reshape(-1, int(channels))


def h5int(counts, channels, out):
    c = load(counts, channels)
    with h5py.File(out, "w") as f:
        f.create_dataset("samples", data=c, compression="gzip", shuffle=True)


def size(path):
    with h5py.File(path, "r") as f:
        d = f["samples"]
        print("%.4f [%s]" % (d.id.get_storage_size() / d.size, ",".join(map(str, d.chunks))))


def samples(path, counts, channels, lsb):
    c = load(counts, channels)
    found = []
    with h5py.File(path, "r") as f:
        f.visititems(lambda n, o: found.append(o) if isinstance(o, h5py.Dataset) and n.endswith("/samples") else None)
        if len(found) != 1:
            sys.exit("%s: want one samples dataset, found %d" % (path, len(found)))
        d = found[0]
        v = d[()]
        scale = d.attrs.get("scale_factor")
        offset = d.attrs.get("add_offset", 0)
        phys = v.astype(np.float64) * scale + offset if scale is not None else v.astype(np.float64)
        diff = np.abs(phys - c.astype(np.float64) * float(lsb)).max()
        form = "%s%s" % (d.dtype, " x %r + %r" % (float(scale), float(offset)) if scale is not None else "")
        print("%.4f %s %.3g" % (d.id.get_storage_size() / d.size, form.replace(" ", "_"), diff))


def split(counts, channels, group, prefix):
    c = load(counts, channels)
    g = int(group)
    for i in range(0, c.shape[1], g):
        np.ascontiguousarray(c[:, i:i + g]).tofile("%s%02d.s16" % (prefix, i // g))


def put(f, name, c, chunks, shuffle, level, scaleoffset):
    dcpl = h5py.h5p.create(h5py.h5p.DATASET_CREATE)
    dcpl.set_chunk(chunks)
    if scaleoffset:
        dcpl.set_scaleoffset(h5py.h5z.SO_INT, 0)
    if shuffle:
        dcpl.set_shuffle()
    if level:
        dcpl.set_deflate(level)
    dcpl.set_fletcher32()
    d = h5py.h5d.create(f.id, name.encode(), h5py.h5t.STD_I16LE, h5py.h5s.create_simple(c.shape), dcpl=dcpl)
    t0 = time.perf_counter()
    d.write(h5py.h5s.ALL, h5py.h5s.ALL, c)
    f.flush()
    t1 = time.perf_counter()
    back = f[name][()]
    t2 = time.perf_counter()
    one = f[name][:, 17]
    t3 = time.perf_counter()
    if not (back == c).all() or not (one == c[:, 17]).all():
        sys.exit("%s: values changed" % name)
    return d.get_storage_size() / c.size, t1 - t0, t2 - t1, t3 - t2


def sweep(counts, channels, out):
    c = load(counts, channels)
    rows = []
    for chunks in [(16384, 4), (4096, 64), (8192, 8), (16384, 8), (65536, 1)]:
        for level in [1, 4, 6, 9]:
            rows.append(("shuffle + deflate %d" % level, chunks, True, level, False))
    rows.append(("deflate 4, no shuffle", (16384, 4), False, 4, False))
    rows.append(("scale-offset", (16384, 4), False, 0, True))
    rows.append(("scale-offset + deflate 4", (16384, 4), False, 4, True))
    print("| filters (all + Fletcher-32) | chunk `[rows, channels]` | bytes/sample | write | read all | read one channel |")
    print("|---|---|---|---|---|---|")
    for what, chunks, shuffle, level, so in rows:
        chunks = (min(chunks[0], c.shape[0]), chunks[1])
        with h5py.File(out, "w") as f:
            b, w, r, one = put(f, "samples", c, chunks, shuffle, level, so)
        print("| %s | `[%d, %d]` | %.3f | %.2f s | %.2f s | %.3f s |" % (what, chunks[0], chunks[1], b, w, r, one), flush=True)


if __name__ == "__main__":
    cmd, args = sys.argv[1], sys.argv[2:]
    {"h5int": h5int, "size": size, "samples": samples, "split": split, "sweep": sweep}[cmd](*args)
