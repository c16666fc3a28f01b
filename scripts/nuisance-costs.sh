#!/usr/bin/env bash
# What each nuisance of the realistic demo world costs the engine: one town per row (the clean
# world, the realistic world with one nuisance group alone, the realistic world with all of them),
# same seed and route, each with its own map from its own survey, every query drive replayed in
# process without a prior. Prints a table (refined share, median and p95 error and radius95
# coverage of refined fixes, refined fixes more than 5 m off and confidently wrong fixes, per
# drive) and writes it to OUT/costs.md, with every run's summary.json under OUT/ROW/. A row
# whose costs.json exists is not run again (an interrupted run resumes where it stopped).
#
# Usage: scripts/nuisance-costs.sh [OUT_DIR] [--seed N] [--route-length-m M] [--rows LIST]
#                                  [--small]
#   OUT_DIR            default out/nuisance-costs
#   --seed N           town seed (41)
#   --route-length-m M survey route (600: long enough for the look-alike stretches)
#   --rows LIST        comma-separated rows out of clean, survey, calibration, changes, traffic,
#                      aliasing, camera, light, all (default: every one, in that order), and
#                      without-GROUP (every group but GROUP: what it costs on top of the others)
#   --small            320x240 images, 6 m survey spacing, no supersampling: minutes instead
#                      of an hour, for checking the script, not for quoting figures
# Every figure is from a simulated town; sightfix is a fallback aid, not a certified
# navigation source.
set -euo pipefail
root="$(cd "$(dirname "$0")/.." && pwd)"
build="${BUILD_DIR:-$root/build}"
out="$root/out/nuisance-costs"
seed=41 length=600 rows="clean,survey,calibration,changes,traffic,aliasing,camera,light,all"
small=()
usage() { sed -n '2,/^set -euo/p' "$0" | sed '$d' | sed 's/^# \{0,1\}//'; }
while [ $# -gt 0 ]; do
  case "$1" in
    -h|--help) usage; exit 0 ;;
    --seed) seed="${2:?--seed needs a value}"; shift 2 ;;
    --route-length-m) length="${2:?--route-length-m needs a value}"; shift 2 ;;
    --rows) [ $# -ge 2 ] || { echo "nuisance-costs: --rows needs a value" >&2; exit 2; }
      rows="$2"; shift 2 ;;
    --small) small=(--image-size 320x240 --survey-spacing-m 6 --supersample 1); shift ;;
    -*) echo "nuisance-costs: unknown option $1 (see --help)" >&2; exit 2 ;;
    *) out="$1"; shift ;;
  esac
done
groups=(survey calibration changes traffic aliasing camera light)
known=" clean ${groups[*]} all ${groups[*]/#/without-} "
IFS=, read -r -a row_list <<<"$rows"
[ ${#row_list[@]} -gt 0 ] || { echo "nuisance-costs: --rows is empty" >&2; exit 2; }
for row in "${row_list[@]}"; do
  [[ "$known" == *" $row "* ]] || { echo "nuisance-costs: unknown row '$row' (see --help)" >&2; exit 2; }
done
# The groups of every group but $1, comma-separated.
all_but() {
  local g kept=()
  for g in "${groups[@]}"; do [ "$g" = "$1" ] || kept+=("$g"); done
  (IFS=,; echo "${kept[*]}")
}
for tool in demo_route/sightfix-demo-route indexer/sightfix-indexer client/sightfix; do
  [ -x "$build/$tool" ] || { echo "nuisance-costs: $build/$tool is not built" >&2; exit 2; }
done
mkdir -p "$out"

for row in "${row_list[@]}"; do
  dir="$out/$row"
  [ -f "$dir/costs.json" ] && { echo "== $row: done before ($dir/costs.json)"; continue; }
  case "$row" in
    clean) world=(--world clean) ;;
    all) world=(--world realistic) ;;
    without-*) world=(--world realistic --nuisances "$(all_but "${row#without-}")") ;;
    *) world=(--world realistic --nuisances "$row") ;;
  esac
  started=$SECONDS
  echo "== $row: town (seed $seed, ${length} m; log $dir/town.log)"
  rm -rf "$dir"
  mkdir -p "$dir"
  "$build/demo_route/sightfix-demo-route" --out "$dir/town" --seed "$seed" \
    --route-length-m "$length" "${world[@]}" "${small[@]}" >"$dir/town.log" 2>&1 ||
    { tail -3 "$dir/town.log" >&2; exit 1; }
  echo "   map ($dir/map.log)"
  "$build/indexer/sightfix-indexer" build --drive "$dir/town/survey" --map "$dir/map" --quiet \
    >"$dir/map.log" 2>&1 || { tail -3 "$dir/map.log" >&2; exit 1; }
  for drive_dir in "$dir"/town/query-*; do
    drive="$(basename "$drive_dir")"
    echo "   replay $drive ($dir/$drive.log)"
    "$build/client/sightfix" replay --map "$dir/map" --drive "$drive_dir" --prior none \
      --out "$dir/$drive" >"$dir/$drive.log" 2>&1 || { tail -3 "$dir/$drive.log" >&2; exit 1; }
  done
  /usr/bin/python3 - "$dir" <<'PY'
import glob, json, os, sys
d = sys.argv[1]
runs = {}
for path in sorted(glob.glob(os.path.join(d, "query-*", "summary.json"))):
    j = json.load(open(path))
    r = j["refined_only"]  # the error figures of refined fixes (the top level's are of all fixes)
    runs[os.path.basename(os.path.dirname(path))] = {
        "queries": j["queries"], "refined": j["refined"],
        "refined_share": j["refined"] / j["queries"] if j["queries"] else None,
        "median_error_m": r["median_error_m"], "p95_error_m": r["p95_error_m"],
        "radius95_coverage": r["radius95_coverage"], "wrong_refined": j["wrong_refined"],
        "confidently_wrong": j["integrity"]["confidently_wrong"]["misleading_fixes"]}
json.dump(runs, open(os.path.join(d, "costs.json"), "w"), indent=2)
PY
  rm -rf "$dir/town/"*/images "$dir/map/tiles"  # the figures stay; the pixels go
  echo "   $row took $((SECONDS - started)) s"
done

/usr/bin/python3 - "$out" "$seed" "$length" "${row_list[@]}" <<'PY'
import json, os, sys
out, seed, length, rows = sys.argv[1], sys.argv[2], sys.argv[3], sys.argv[4:]
drives = ["query-day", "query-dusk", "query-overcast", "query-night", "query-offmap"]
def cell(r):
    if r is None:
        return "-"
    if not r["refined"]:
        return "%.0f %% (none)" % (100 * r["refined_share"])
    return "%.0f %%, %.2f / %.2f m, %.2f, %d / %d" % (
        100 * r["refined_share"], r["median_error_m"], r["p95_error_m"],
        r["radius95_coverage"], r["wrong_refined"], r["confidently_wrong"])
lines = ["Seed %s, %s m route, no prior. Each cell: refined share; median / p95 error of refined "
         "fixes; their radius95 coverage; refined fixes more than 5 m off / confidently wrong "
         "fixes (error > 3 x radius95, coarse ones included). A simulated town: sightfix is a "
         "fallback aid, not a certified navigation source." % (seed, length), "",
         "| world | " + " | ".join(d.replace("query-", "") for d in drives) + " |",
         "| --- |" + " --- |" * len(drives)]
for row in rows:
    runs = json.load(open(os.path.join(out, row, "costs.json")))
    name = {"clean": "clean", "all": "all nuisances"}.get(
        row, "all but " + row[len("without-"):] if row.startswith("without-") else row + " alone")
    lines.append("| %s | %s |" % (name, " | ".join(cell(runs.get(d)) for d in drives)))
text = "\n".join(lines) + "\n"
open(os.path.join(out, "costs.md"), "w").write(text)
print(text, end="")
PY
