#!/usr/bin/env bash
# The demo's world options from the command line: the README's realistic example runs and writes
# what the README says (truth.csv and camera-truth.yml beside the survey's files, the preset and
# the scale in town.json, the survey's sigma_h_m at half its receiver's honest figure away from
# multipath jumps), --help names both options, and bad values are refused with exit 2 and a
# message naming the option.
# Usage: demo_world_cli_test.sh SOURCE_DIR BUILD_DIR
set -u
src="$1"
build="$2"
. "$src/tests/lib/checks.sh"
demo="$build/demo_route/sightfix-demo-route"

expect "--help names --world" 0 "pitch), the default; clean" -- "$demo" --help
expect "--help names --survey-sigma-scale" 0 "survey-sigma-scale" -- "$demo" --help
expect "unknown world refused" 2 "world must be clean or realistic, got 'muddy'" -- \
  "$demo" --out "$tmp/x" --world muddy
expect "zero sigma scale refused" 2 "survey-sigma-scale must be > 0" -- \
  "$demo" --out "$tmp/x" --survey-sigma-scale 0
expect "negative sigma scale refused" 2 "survey-sigma-scale must be > 0" -- \
  "$demo" --out "$tmp/x" --survey-sigma-scale -1
expect "--help names --nuisances" 0 "--nuisances arg" -- "$demo" --help
expect "unknown nuisance group refused" 2 "unknown nuisance group 'fog' (choose from survey, calibration" -- \
  "$demo" --out "$tmp/x" --world realistic --nuisances survey,fog
expect "repeated nuisance group refused" 2 "nuisance group 'survey' named twice" -- \
  "$demo" --out "$tmp/x" --world realistic --nuisances survey,traffic,survey
expect "nuisance groups refused in the clean world" 2 "apply to the realistic world only" -- \
  "$demo" --out "$tmp/x" --world clean --nuisances survey
expect "empty nuisance list refused" 2 "needs at least one group" -- \
  "$demo" --out "$tmp/x" --world realistic --nuisances ""
expect "huge sigma scale refused" 2 "survey-sigma-scale must be > 0 and <= 10" -- \
  "$demo" --out "$tmp/x" --survey-sigma-scale 11

# Runs the README example NAME whose first line holds PATTERN (with its continuation line), with
# this build's program and its README output folder README_OUT moved to OUT.
run_readme_example() {
  local name="$1" pattern="$2" readme_out="$3" out="$4" example
  example="$(grep -A1 -- "$pattern" "$src/README.md" | sed 's/\\$//' | tr '\n' ' ')"
  example="${example//build\/demo_route\/sightfix-demo-route/$demo}"
  example="${example//$readme_out/$out}"
  case "$example" in
    "$demo "*"--out $out"*) ok "README $name found" ;;
    *) bad "README $name found (got '$example')" ;;
  esac
  if eval "$example" >"$out.log" 2>&1; then ok "README $name runs"; else
    bad "README $name runs ($(tail -3 "$out.log"))"
  fi
}

# The README's example: the line with --survey-sigma-scale 0.5 and its continuation.
run_readme_example example '--world realistic --survey-sigma-scale 0.5' /tmp/real-town "$tmp/real-town"
for f in survey/truth.csv survey/camera-truth.yml query-day/camera-truth.yml; do
  if [ -s "$tmp/real-town/$f" ]; then ok "writes $f"; else bad "writes $f"; fi
done
# town.json records the preset and the scale; every drive.csv row outside a jump reports half
# the drawn sigma (4 decimals in the file), rows in a jump more.
if "$py" - "$tmp/real-town" <<'PY'; then ok "sigma_h_m is half the honest sigma"; else bad "sigma_h_m is half the honest sigma"; fi
import csv, json, sys
out = sys.argv[1]
town = json.load(open(out + "/town.json"))
assert town["world"] == "realistic" and town["survey_sigma_scale"] == 0.5, town["world"]
error = town["drives"]["survey"]["survey_error"]
half = round(0.5 * error["sigma_horizontal_m_per_axis"], 4)
rows = list(csv.DictReader(open(out + "/survey/drive.csv")))
plain = [r for r in rows if abs(float(r["sigma_h_m"]) - half) < 1e-9]
grown = [r for r in rows if float(r["sigma_h_m"]) > half + 1e-9]
assert len(plain) + len(grown) == len(rows), "a row below half the honest sigma"
assert len(grown) == error["multipath_frames"], (len(grown), error["multipath_frames"])
print(f"{len(plain)} rows at {half} m, {len(grown)} in multipath jumps")
PY

# The README's --nuisances example: only the survey's error is on, so the survey has its
# truth.csv, no drive has a camera-truth.yml (no calibration error), and there is no off-map
# drive or look-alike stretch (aliasing off).
run_readme_example "--nuisances example" '--world realistic --nuisances survey' \
  /tmp/survey-only-town "$tmp/survey-only"
if "$py" - "$tmp/survey-only" <<'PY'; then ok "survey-only town has the survey error alone"; else bad "survey-only town has the survey error alone"; fi
import json, os, sys
out = sys.argv[1]
town = json.load(open(out + "/town.json"))
assert town["nuisances"] == ["survey"], town["nuisances"]
assert "survey_error" in town["drives"]["survey"], "no survey error recorded"
assert os.path.exists(out + "/survey/truth.csv"), "no truth.csv"
assert not os.path.exists(out + "/query-offmap"), "an off-map drive without aliasing"
assert "look_alikes" not in town, "look-alikes without aliasing"
for drive in town["drives"]:
    assert not os.path.exists(out + "/" + drive + "/camera-truth.yml"), drive + ": calibration error"
    assert "traffic" not in town["drives"][drive], drive + ": traffic"
    assert "changes" not in town["drives"][drive], drive + ": changed world"
print("nuisances", town["nuisances"], "drives", sorted(town["drives"]))
PY
finish
