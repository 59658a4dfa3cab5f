"""Raw-bytes identifier scan, independent of muarc's own scanner.

usage: rawscan.py NEEDLES.json [--root DIR] FILE...

NEEDLES.json is a JSON list of strings. Every FILE's raw bytes are searched
for every needle as UTF-8, UTF-16LE and UTF-16BE, ignoring the case of ASCII
letters, as a plain substring (no word boundaries: stricter than muarc).
With --root, each FILE's path relative to DIR (its folder and file names)
is searched too, reported with the encoding "name" and offset -1.
Prints one JSON object: {"files": n, "bytes": n, "hits": [[file, needle,
encoding, offset], ...]}. Standard library only.
"""
import json
import os
import sys


def lower_ascii(b):
    return b.translate(bytes.maketrans(b"ABCDEFGHIJKLMNOPQRSTUVWXYZ", b"abcdefghijklmnopqrstuvwxyz"))


def main():
    needles = json.load(open(sys.argv[1], encoding="utf-8"))
    forms = []
    for n in needles:
        low = "".join(c.lower() if c.isascii() else c for c in n)
        for enc in ("utf-8", "utf-16-le", "utf-16-be"):
            forms.append((n, enc, lower_ascii(low.encode(enc))))
    files, root = sys.argv[2:], None
    if files[:1] == ["--root"]:
        root, files = files[1], files[2:]
    hits, total = [], 0
    for path in files:
        with open(path, "rb") as f:
            data = lower_ascii(f.read())
        total += len(data)
        for n, enc, pat in forms:
            i = data.find(pat)
            if i >= 0:
                hits.append([path, n, enc, i])
        if root is not None:
            name = os.path.relpath(path, root).lower()
            for n in needles:
                if n.lower() in name:
                    hits.append([path, n, "name", -1])
    json.dump({"files": len(files), "bytes": total, "hits": hits}, sys.stdout)


main()
