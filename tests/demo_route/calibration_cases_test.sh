#!/usr/bin/env bash
# scripts/calibration-cases.sh from the README: bad input is refused (no town, a clean town
# without camera-truth.yml, a bad option); the README's small example (a 150 m realistic town of
# small images, the day drive) runs and writes cases.md with the four cases, each with a figure
# cell, and cases.json with the survey's own error; a second run replays nothing again. The full
# table is a script run (README, "Calibration: what it costs and what self-calibration wins
# back"); this checks the script, not its figures.
# Usage: calibration_cases_test.sh SOURCE_DIR BUILD_DIR
set -u
src="$1" build="$2"
source "$(dirname "$0")/../lib/checks.sh"
script="$src/scripts/calibration-cases.sh"
export BUILD_DIR="$build"

expect "--help shows the usage" 0 "--self-calibration" -- bash "$script" --help
expect "no town refused" 2 "needs TOWN and OUT" -- bash "$script"
expect "unknown option refused" 2 "unknown option --colour" -- bash "$script" a b --colour red
expect "bad self-calibration value refused" 2 "must be on or off" -- \
  bash "$script" a b --self-calibration maybe
mkdir -p "$tmp/clean/survey"
expect "a town without camera-truth.yml refused" 2 "no camera-truth.yml" -- \
  bash "$script" "$tmp/clean" "$tmp/x"

# The README example (its lines and continuations), with its folders moved into $tmp.
# A line without a trailing backslash ends its command (;).
example="$(grep -A3 -- '--out /tmp/cal-town' "$src/README.md" | sed -n '1,/calibration-cases.sh/p' |
  sed 's/\\$//; t; s/$/;/' | tr '\n' ' ')"
example="${example//build\//$build/}"
example="${example//scripts\/calibration-cases.sh/bash $script}"
example="${example//\/tmp\/cal-town/$tmp/town}"
example="${example//\/tmp\/cal-cases/$tmp/cases}"
case "$example" in
  *"sightfix-demo-route --out $tmp/town"*"bash $script $tmp/town $tmp/cases"*) ok "README example found" ;;
  *) bad "README example found (got '$example')" ;;
esac
if (cd "$src" && eval "$example") >"$tmp/run1.log" 2>&1; then ok "README example runs"; else
  bad "README example runs ($(tail -3 "$tmp/run1.log"))"
fi
if "$py" - "$tmp/cases" <<'PY'; then ok "cases.md: four cases, a cell each; cases.json"; else bad "cases.md"; fi
import json, re, sys
d = sys.argv[1]
rows = [l for l in open(d + "/cases.md") if l.startswith("| ") and not l.startswith(("| survey", "| ---"))]
assert [tuple(c.strip() for c in r.split("|")[1:3]) for r in rows] == [
    ("exact", "exact"), ("exact", "delivered"), ("delivered", "exact"), ("delivered", "delivered")], rows
for r in rows:
    cell = r.split("|")[3].strip()
    assert re.fullmatch(r"\d+ %, (\d+\.\d\d|-) m, (\d\.\d\d|-)", cell), cell
j = json.load(open(d + "/cases.json"))
assert 0 < j["survey_median_error_m"] < 5, j
assert len(j["cases"]) == 4, j
PY
if bash "$script" "$tmp/town" "$tmp/cases" --drives query-day >"$tmp/run2.log" 2>&1 &&
  ! grep -q "replay\|== map" "$tmp/run2.log"; then
  ok "a second run replays nothing again"
else
  bad "a second run replays nothing again ($(tail -3 "$tmp/run2.log"))"
fi
finish
