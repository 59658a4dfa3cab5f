# The outside reading of the differential test: Python's csv module and
# numpy read each generated file with the dialect the generator used (told,
# not detected). Input: a JSON list of cases on stdin; output: a JSON list of
# results, one per case: {"error": text} or {"labels": [...], "columns":
# [[...], ...]} with numbers as float64 bit patterns (hex) or strings.
import csv, io, json, struct, sys
import numpy as np

def bits(x):
    if x != x:
        return "NaN"
    return struct.pack(">d", float(x)).hex()

def cells(lines, delim):
    text = "".join(lines)
    if delim == " ":
        rows = list(csv.reader(io.StringIO(text), delimiter=" ", skipinitialspace=True, strict=True))
        return [[c for c in r if c != ""] for r in rows if r]
    return [r for r in csv.reader(io.StringIO(text), delimiter=delim, strict=True) if r]

def number(c, comma):
    c = c.strip()
    if c == "" or c in ("NaN", "nan", "NA"):
        return np.nan
    if comma:
        c = c.replace(",", ".")
    return np.float64(c)

def one(case):
    with open(case["path"], encoding="utf-8-sig", newline="") as f:
        lines = f.readlines()[case["skip"]:]
    rows = cells(lines, case["delim"])
    head = rows[0] if case["header"] else None
    body = rows[1:] if case["header"] else rows
    comma = case["decimal_comma"]
    ncol = len(rows[0])
    if any(len(r) != ncol for r in body):
        return {"error": "ragged"}
    out = []
    for j in range(ncol):
        if j == case.get("time_col", -1):
            continue
        if j in (case.get("text_cols") or []):
            out.append([r[j] for r in body])
        else:
            out.append([bits(number(r[j], comma)) for r in body])
    labels = [h.split("[")[0].strip() for i, h in enumerate(head) if i != case.get("time_col", -1)] if head else []
    return {"labels": labels, "columns": out}

res = []
for case in json.load(sys.stdin):
    try:
        res.append(one(case))
    except Exception as e:  # a reading the reference refuses
        res.append({"error": type(e).__name__ + ": " + str(e)})
json.dump(res, sys.stdout)
