"""Baseline for muarc's import benchmark: read an EMG CSV with pandas.read_csv
and store the samples with h5py as a 2-D float32 dataset, gzip level 4 +
shuffle, chunks of 4096 rows (all channels).

    /usr/bin/python3 bench_pandas.py IN.csv OUT.h5

Run with Debian's python3 (python3-pandas, python3-h5py)."""
import sys

import h5py
import numpy as np
import pandas as pd


def main():
    src, dst = sys.argv[1], sys.argv[2]
    df = pd.read_csv(src)
    data = df.iloc[:, 1:].to_numpy(dtype=np.float32)
    with h5py.File(dst, "w") as f:
        f.create_dataset("samples", data=data, chunks=(min(4096, len(data)), data.shape[1]),
                         compression="gzip", compression_opts=4, shuffle=True)
        f["samples"].attrs["sampling_rate_hz"] = 1.0 / (df.iloc[1, 0] - df.iloc[0, 0])


if __name__ == "__main__":
    main()
