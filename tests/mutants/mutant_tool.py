#!/usr/bin/env python3
"""File work for scripts/mutants.sh: reads tests/mutants/mutants.tsv, checks that every entry
applies exactly once, applies and reverts one mutant, and syncs a scratch copy of the tree by
content (a file whose bytes did not change keeps its mtime, so the scratch build stays
incremental).

Usage:
  mutant_tool.py list TSV                  id, file, tests, why of every entry
  mutant_tool.py field TSV ID NAME         one field (file, targets, tests) of one entry
  mutant_tool.py check TSV ROOT [ID...]    every (or each named) entry applies exactly once
  mutant_tool.py apply TSV ROOT ID         applies one entry, keeping the original beside it
  mutant_tool.py revert TSV ROOT ID        puts the original back
  mutant_tool.py sync FROM TO              makes TO's files equal FROM's, rewriting only those
                                           whose bytes differ; deletes files absent from FROM
Exit status: 0 on success, 1 when an entry does not apply or is unknown, 2 on bad usage.
"""
import os
import shutil
import sys

FIELDS = ("id", "file", "text", "replacement", "targets", "tests", "why")
BACKUP = ".mutant-original"


def unescape(s):
    out, i = [], 0
    while i < len(s):
        if s[i] == "\\" and i + 1 < len(s):
            out.append({"n": "\n", "t": "\t", "\\": "\\"}.get(s[i + 1], s[i + 1]))
            i += 2
        else:
            out.append(s[i])
            i += 1
    return "".join(out)


def read_entries(tsv):
    entries = []
    for n, line in enumerate(open(tsv, encoding="utf-8"), 1):
        line = line.rstrip("\n")
        if not line or line.startswith("#"):
            continue
        cols = line.split("\t")
        if len(cols) != len(FIELDS):
            sys.exit("%s:%d: %d columns, expected %d" % (tsv, n, len(cols), len(FIELDS)))
        e = dict(zip(FIELDS, cols))
        e["text"], e["replacement"] = unescape(e["text"]), unescape(e["replacement"])
        entries.append(e)
    ids = [e["id"] for e in entries]
    if len(set(ids)) != len(ids):
        sys.exit("%s: duplicate ids" % tsv)
    return entries


def find(entries, mutant_id):
    for e in entries:
        if e["id"] == mutant_id:
            return e
    sys.exit("no mutant %r (mutants.sh --list names them)" % mutant_id)


def problem(root, e):
    """None when the entry applies exactly once, else what is wrong."""
    path = os.path.join(root, e["file"])
    if not os.path.isfile(path):
        return "no file %s" % e["file"]
    count = open(path, encoding="utf-8").read().count(e["text"])
    if count != 1:
        return "its text occurs %d times in %s (must be once)" % (count, e["file"])
    if e["text"] == e["replacement"]:
        return "its replacement is its text"
    return None


def check(tsv, root, ids):
    entries = read_entries(tsv)
    chosen = [find(entries, i) for i in ids] if ids else entries
    bad = 0
    for e in chosen:
        p = problem(root, e)
        print("%-30s %s" % (e["id"], "applies" if p is None else "DOES NOT APPLY: " + p))
        bad += p is not None
    print("%d of %d entries apply" % (len(chosen) - bad, len(chosen)))
    return 1 if bad else 0


def apply(tsv, root, mutant_id):
    e = find(read_entries(tsv), mutant_id)
    p = problem(root, e)
    if p:
        print("%s: %s" % (mutant_id, p), file=sys.stderr)
        return 1
    path = os.path.join(root, e["file"])
    shutil.copy2(path, path + BACKUP)
    text = open(path, encoding="utf-8").read()
    open(path, "w", encoding="utf-8").write(text.replace(e["text"], e["replacement"], 1))
    return 0


def revert(tsv, root, mutant_id):
    path = os.path.join(root, find(read_entries(tsv), mutant_id)["file"])
    if os.path.exists(path + BACKUP):
        # The original bytes with a new mtime: make rebuilds the file (ccache serves it).
        shutil.copyfile(path + BACKUP, path)
        os.remove(path + BACKUP)
    return 0


def sync(src, dst):
    changed = removed = 0
    seen = set()
    for base, dirs, files in os.walk(src):
        rel = os.path.relpath(base, src)
        os.makedirs(os.path.join(dst, rel), exist_ok=True)
        for f in files:
            r = os.path.normpath(os.path.join(rel, f))
            seen.add(r)
            a, b = os.path.join(src, r), os.path.join(dst, r)
            if os.path.isfile(b) and open(a, "rb").read() == open(b, "rb").read():
                continue
            shutil.copy2(a, b)
            os.utime(b)  # newer than any object built from the old bytes
            changed += 1
    for base, dirs, files in os.walk(dst):
        for f in files:
            r = os.path.normpath(os.path.relpath(os.path.join(base, f), dst))
            if r not in seen:
                os.remove(os.path.join(dst, r))
                removed += 1
    print("scratch tree: %d files written, %d removed" % (changed, removed))
    return 0


def main(argv):
    if len(argv) < 2:
        print(__doc__)
        return 2
    cmd, args = argv[1], argv[2:]
    if cmd == "list" and len(args) == 1:
        for e in read_entries(args[0]):
            print("%-30s %-38s %-40s %s" % (e["id"], e["file"], e["tests"], e["why"]))
        return 0
    if cmd == "field" and len(args) == 3:
        print(find(read_entries(args[0]), args[1])[args[2]])
        return 0
    if cmd == "check" and len(args) >= 2:
        return check(args[0], args[1], args[2:])
    if cmd == "apply" and len(args) == 3:
        return apply(*args)
    if cmd == "revert" and len(args) == 3:
        return revert(*args)
    if cmd == "sync" and len(args) == 2:
        return sync(*args)
    print(__doc__)
    return 2


if __name__ == "__main__":
    sys.exit(main(sys.argv))
