#!/usr/bin/env bash
# scripts/nuisance-costs.sh from the README: bad rows and options are refused; the README's small
# example (two rows, a 150 m town of small images) runs, writes costs.md with one table row per
# world row and one figure cell per query drive the row's town has, and a second run resumes
# from what the first wrote instead of running again. The full table is an hour's script run
# (README, "What each nuisance costs"); this checks the script, not its figures.
# Usage: nuisance_costs_test.sh SOURCE_DIR BUILD_DIR
set -u
src="$1" build="$2"
source "$(dirname "$0")/../lib/checks.sh"
script="$src/scripts/nuisance-costs.sh"
export BUILD_DIR="$build"

expect "--help shows the usage" 0 "--rows LIST" -- bash "$script" --help
expect "unknown row refused" 2 "unknown row 'fog'" -- bash "$script" "$tmp/x" --rows clean,fog
expect "unknown group to leave out refused" 2 "unknown row 'without-fog'" -- \
  bash "$script" "$tmp/x" --rows without-fog
expect "unknown option refused" 2 "unknown option --colour" -- bash "$script" "$tmp/x" --colour red
expect "empty rows refused" 2 "--rows is empty" -- bash "$script" "$tmp/x" --rows ""

# The README example (its line and continuation), with its output folder moved into $tmp.
example="$(grep -A1 -- 'scripts/nuisance-costs.sh /tmp/costs-small' "$src/README.md" |
  sed 's/\\$//' | tr '\n' ' ')"
example="${example//scripts\/nuisance-costs.sh/bash $script}"
readme_out=/tmp/costs-small
example="${example//$readme_out/$tmp/costs}"
case "$example" in
  "bash $script $tmp/costs "*"--small"*) ok "README example found" ;;
  *) bad "README example found (got '$example')" ;;
esac
if eval "$example" >"$tmp/run1.log" 2>&1; then ok "README example runs"; else
  bad "README example runs ($(tail -3 "$tmp/run1.log"))"
fi
if "$py" - "$tmp/costs/costs.md" <<'PY'; then ok "costs.md: a row per world, a cell per drive"; else bad "costs.md"; fi
import re, sys
rows = [l for l in open(sys.argv[1]) if l.startswith("| ") and not l.startswith(("| world", "| ---"))]
assert [r.split("|")[1].strip() for r in rows] == ["clean", "survey alone"], rows
for r in rows:
    cells = [c.strip() for c in r.strip().strip("|").split("|")][1:]
    assert len(cells) == 5, cells  # day, dusk, overcast, night, offmap
    # Neither row's town has a night or an off-map drive (light and aliasing are off).
    assert cells[3:] == ["-", "-"], cells
    for c in cells[:3]:
        assert re.fullmatch(r"\d+ %(, \d+\.\d\d / \d+\.\d\d m, \d\.\d\d, \d+ / \d+| \(none\))", c), c
PY
if bash "$script" "$tmp/costs" --small --rows clean,survey --route-length-m 150 >"$tmp/run2.log" 2>&1 &&
  [ "$(grep -c 'done before' "$tmp/run2.log")" -eq 2 ]; then
  ok "a second run resumes"
else
  bad "a second run resumes ($(tail -3 "$tmp/run2.log"))"
fi
finish
