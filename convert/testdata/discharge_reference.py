"""Reference reader of discharge files for muarc's differential oracle.

Reads a JSON list of cases on stdin, each a file path with the reading
options known to be true (shape, labels, header, delimiter, decimal comma,
time base, first index, lines to skip above the table, sample grid), and
prints one JSON object per case: the unit labels in file order and each
unit's sorted sample indices. Uses only Python's csv module and numpy.
"""
import csv
import json
import re
import sys

import numpy as np

MARK = re.compile(r"\s*[\[(][^\])]*[\])]\s*$")
PAD = ("", "NaN")


def cells_of(line, d):
    if d == " ":
        return [c for c in next(csv.reader([line], delimiter=" ", skipinitialspace=True)) if c != ""]
    return [c.strip() for c in next(csv.reader([line], delimiter=d, skipinitialspace=True))]


def samples(vals, c):
    v = np.array([x.replace(",", ".") if c["decimal_comma"] else x for x in vals], dtype=float)
    if c["time_base"] == "s":
        x = (v - c["start_s"]) * c["rate_hz"]
    elif c["time_base"] == "ms":
        x = (v / 1000.0 - c["start_s"]) * c["rate_hz"]
    else:
        x = v - c["first_index"]
    return sorted(int(k) for k in np.floor(x + 0.5))


def read(c):
    with open(c["path"], encoding="utf-8-sig", newline="") as f:
        lines = f.read().splitlines()[c["skip_lines"]:]
    d = c["delimiter"]
    lines = [l.strip(" \r") if d == "\t" else l.strip() for l in lines if l.strip() != ""]
    labels, trains = [], []
    if c["colon"]:
        for l in lines:
            key, rest = l.split(":", 1)
            labels.append(key.strip())
            rest = rest.strip()
            trains.append(samples(cells_of(rest, d), c) if rest else [])
        return labels, trains
    rows = [cells_of(l, d) for l in lines]
    hdr = None
    if c["header"]:
        hdr, rows = rows[0], rows[1:]
    shape = c["shape"]
    if shape == "lines":
        for r in rows:
            labels.append(r[0] if c["labels"] else "")
            times = r[1:] if c["labels"] else r
            trains.append(samples([x for x in times if x not in PAD], c))
    elif shape == "long":
        order = {}
        for r in rows:
            if r[0] not in order:
                order[r[0]] = []
            order[r[0]].append(r[1])
        for k, v in order.items():
            labels.append(k)
            trains.append(samples(v, c))
    elif shape == "columns":
        n = len(hdr) if hdr else len(rows[0])
        cols = [[] for _ in range(n)]
        for r in rows:
            for j in range(len(r)):
                if r[j] not in PAD:
                    cols[j].append(r[j])
        labels = [MARK.sub("", h) for h in hdr] if hdr else [""] * n
        trains = [samples(col, c) for col in cols]
    elif shape == "matrix":
        m = np.array(rows, dtype=int)
        n = m.shape[1]
        labels = list(hdr) if hdr else [""] * n
        trains = [[int(i) for i in np.flatnonzero(m[:, j])] for j in range(n)]
    return labels, trains


def main():
    cases = json.load(sys.stdin)
    out = []
    for c in cases:
        labels, trains = read(c)
        out.append({"labels": labels, "trains": trains})
    json.dump(out, sys.stdout)


main()
