#!/usr/bin/python3
"""Baselines for `muarc validate` timings, with h5py (Debian python3-h5py).

read_all_h5py.py FILE        read every dataset once, decoded (h5py undoes
                             shuffle + deflate and checks Fletcher-32), in
                             chunk-high row bands so memory stays flat
read_all_h5py.py --raw FILE  read every stored chunk of every chunked
                             dataset once as stored bytes (read_direct_chunk,
                             no decoding), and every other dataset decoded:
                             the same bytes muarc's checksum scan reads
Prints the bytes read and the seconds taken."""
import sys
import time

import h5py


def datasets(f):
    out = []
    f.visititems(lambda name, obj: out.append(obj) if isinstance(obj, h5py.Dataset) else None)
    return out


def read_decoded(d):
    if d.shape == () or d.size == 0:
        return 0
    step = d.chunks[0] if d.chunks else d.shape[0]
    n = 0
    for start in range(0, d.shape[0], step):
        n += d[start:start + step].nbytes
    return n


def read_raw(d):
    if not d.chunks:
        return read_decoded(d)
    n = 0
    for i in range(d.id.get_num_chunks()):
        info = d.id.get_chunk_info(i)
        _, data = d.id.read_direct_chunk(info.chunk_offset)
        n += len(data)
    return n


def main(args):
    raw = args[0] == "--raw"
    path = args[-1]
    t0 = time.perf_counter()
    total = 0
    with h5py.File(path, "r") as f:
        for d in datasets(f):
            total += read_raw(d) if raw else read_decoded(d)
    mode = "raw chunks" if raw else "decoded"
    print("h5py read %d bytes (%s) of %s in %.3f s" % (total, mode, path, time.perf_counter() - t0))


if __name__ == "__main__":
    main(sys.argv[1:])
