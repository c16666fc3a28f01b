#!/usr/bin/env python3
"""Sizes a reader can hold in mind: no source file over MAX_FILE_LINES lines and no function
over MAX_FUNCTION_LINES lines (body braces included) in our C++ (indexer, server, client, proto,
demo_route, tests/lib). A function is found by its opening line: a line ending in '{' that
closes a parameter list and is not a control statement, a namespace, a type or an initializer;
its end is the matching brace (string and character literals and comments skipped). Lambdas
count toward the function that holds them.

Usage: check_sizes.py SOURCE_DIR [--report]   (--report lists the 15 longest functions)
"""
import os
import re
import sys

MAX_FILE_LINES = 500
MAX_FUNCTION_LINES = 80
FOLDERS = ("indexer", "server", "client", "proto", "demo_route", "tests/lib")
NOT_A_FUNCTION = re.compile(
    r"^\s*(if|for|while|switch|catch|else|do|namespace|struct|class|enum|union|extern|try)\b")
STRIP = re.compile(r'"(?:\\.|[^"\\])*"|\'(?:\\.|[^\'\\])*\'|//.*$')


def code_lines(text):
    """Lines with strings, characters and comments blanked."""
    out, in_block = [], False
    for line in text.split("\n"):
        if in_block:
            end = line.find("*/")
            if end < 0:
                out.append("")
                continue
            line, in_block = line[end + 2:], False
        line = STRIP.sub('""', line)
        start = line.find("/*")
        while start >= 0:
            end = line.find("*/", start + 2)
            if end < 0:
                line, in_block = line[:start], True
                break
            line = line[:start] + line[end + 2:]
            start = line.find("/*")
        out.append(line)
    return out


def functions(lines):
    """(name line, first line number, length) of each outermost function body."""
    found, i = [], 0
    while i < len(lines):
        line = lines[i].rstrip()
        head = " ".join(l.strip() for l in lines[max(0, i - 3):i + 1])
        if (line.endswith("{") and ")" in line or line.endswith(") const {")) and \
                not NOT_A_FUNCTION.match(line) and not line.lstrip().startswith("}") and \
                "= {" not in line and not line.strip().startswith(("[", "return", "auto ")) and \
                "](" not in line and "[&" not in line and "[=" not in line:
            depth, j = 0, i
            while j < len(lines):
                depth += lines[j].count("{") - lines[j].count("}")
                if depth <= 0:
                    break
                j += 1
            found.append((head.strip()[-110:], i + 1, j - i + 1))
            i = j + 1
            continue
        i += 1
    return found


def main():
    src = sys.argv[1]
    report = "--report" in sys.argv
    errors, all_functions = [], []
    for folder in FOLDERS:
        for dirpath, _, files in os.walk(os.path.join(src, folder)):
            for name in sorted(files):
                if not name.endswith((".h", ".cc")) or name.endswith(".pb.h"):
                    continue
                path = os.path.join(dirpath, name)
                rel = os.path.relpath(path, src)
                text = open(path, encoding="utf-8").read()
                n = text.count("\n")
                if n > MAX_FILE_LINES:
                    errors.append(f"{rel}: {n} lines (at most {MAX_FILE_LINES})")
                for head, line, length in functions(code_lines(text)):
                    all_functions.append((length, rel, line, head))
                    if length > MAX_FUNCTION_LINES:
                        errors.append(f"{rel}:{line}: function of {length} lines "
                                      f"(at most {MAX_FUNCTION_LINES}): {head}")
    lengths = sorted(f[0] for f in all_functions)
    for e in errors:
        print("FAIL", e)
    if report:
        for length, rel, line, head in sorted(all_functions, reverse=True)[:15]:
            print(f"{length:4d} {rel}:{line} {head}")
    median = lengths[len(lengths) // 2] if lengths else 0
    print(f"sizes: {len(all_functions)} functions, median {median} lines, longest "
          f"{lengths[-1] if lengths else 0}; {len(errors)} over the limits")
    return 1 if errors else 0


if __name__ == "__main__":
    sys.exit(main())
