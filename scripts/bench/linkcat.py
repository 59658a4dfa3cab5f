"""linkcat.py SRC_CATALOGUE OUT_CATALOGUE PREFIX...: the catalogue of a folder
whose sub-folders PREFIX/ hold hard links to the recordings of SRC's folder.
A hard link has the same inode, size and times as its original, so every
entry is copied under each prefix; muarc still checks every entry against
its file (a stat per file) on each run. Used by scripts/bench-study.sh to
avoid reading 10,000 recordings to build the catalogue it times."""
import json
import sys

src, out, prefixes = sys.argv[1], sys.argv[2], sys.argv[3:]
with open(src, encoding="utf-8") as f:
    header = json.loads(f.readline())
    entries = [json.loads(line) for line in f]
header["files"] = len(entries) * len(prefixes)
with open(out, "w", encoding="utf-8") as f:
    f.write(json.dumps(header) + "\n")
    for p in prefixes:
        for e in entries:
            e = dict(e, path=p + "/" + e["path"])
            f.write(json.dumps(e, ensure_ascii=False, separators=(",", ":")) + "\n")
