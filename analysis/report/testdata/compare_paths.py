#!/usr/bin/python3
"""Reads pairs of SVG path data (original, rewritten), one pair per two
lines, with Debian's python3-svg.path (not muarc's parser) and checks that
both draw the same segments: the same kinds in the same order, every end
point within TOL points of the original's, arcs with the same flags and
radii within TOL. Prints "pairs N segments S" and one line per mismatch.
"""
import sys

from svg.path import parse_path, Move, Line, Arc, Close

TOL = float(sys.argv[2])


def kind(s):
    for k in (Move, Line, Arc, Close):
        if isinstance(s, k):
            return k.__name__
    return type(s).__name__


def near(a, b):
    return abs(a.real - b.real) <= TOL and abs(a.imag - b.imag) <= TOL


lines = open(sys.argv[1]).read().split("\n")
pairs = segments = bad = 0
for i in range(0, len(lines) - 1, 2):
    a, b = parse_path(lines[i]), parse_path(lines[i + 1])
    pairs += 1
    if len(a) != len(b):
        print("pair %d: %d segments, rewritten %d" % (i // 2, len(a), len(b)))
        bad += 1
        continue
    for k, (s, t) in enumerate(zip(a, b)):
        segments += 1
        why = None
        if kind(s) != kind(t):
            why = "kind %s, rewritten %s" % (kind(s), kind(t))
        elif not near(s.end, t.end):
            why = "end %r, rewritten %r" % (s.end, t.end)
        elif isinstance(s, Arc) and (s.arc != t.arc or s.sweep != t.sweep or not near(s.radius, t.radius)):
            why = "arc %r, rewritten %r" % (s, t)
        if why:
            print("pair %d segment %d: %s" % (i // 2, k, why))
            bad += 1
            break
print("pairs %d segments %d" % (pairs, segments))
