#!/usr/bin/env bash
# What calibration error costs, and what self-calibration wins back: on one realistic demo town,
# the survey's and the queries' camera.yml each either exact (the renderer's camera-truth.yml) or
# as delivered (slightly off, as every real calibration is), four cases from the same images:
#
#   survey exact    + queries exact        survey exact    + queries as delivered
#   survey as delivered + queries exact    survey as delivered + queries as delivered
#
# Two maps (one per survey calibration) and a replay of each query drive under each map, without
# a prior. Prints a table (refined share, median error of refined fixes, their radius95
# coverage, and the survey poses' own median error against truth.csv for scale) and writes it to
# OUT/cases.md, with every run's summary.json under OUT/. Drives are symlinked copies (images
# shared); only camera.yml differs. A case whose summary.json exists is not replayed again.
#
# Usage: scripts/calibration-cases.sh TOWN OUT [--drives LIST] [--self-calibration on|off]
#   TOWN                a realistic demo town (sightfix-demo-route --out TOWN; --world clean has
#                       no calibration error and is refused)
#   OUT                 output folder
#   --drives LIST       query drives, comma-separated (default: query-day,query-dusk)
#   --self-calibration  passed to sightfix-indexer build (default on; off shows the cost alone)
# Every figure is from a simulated town; sightfix is a fallback aid, not a certified navigation
# source.
set -euo pipefail
root="$(cd "$(dirname "$0")/.." && pwd)"
build="${BUILD_DIR:-$root/build}"
drives="query-day,query-dusk" self_cal=on town="" out=""
usage() { sed -n '2,/^set -euo/p' "$0" | sed '$d' | sed 's/^# \{0,1\}//'; }
while [ $# -gt 0 ]; do
  case "$1" in
    -h|--help) usage; exit 0 ;;
    --drives) drives="${2:?--drives needs a value}"; shift 2 ;;
    --self-calibration) self_cal="${2:?--self-calibration needs on or off}"; shift 2 ;;
    -*) echo "calibration-cases: unknown option $1 (see --help)" >&2; exit 2 ;;
    *) if [ -z "$town" ]; then town="$1"; elif [ -z "$out" ]; then out="$1"; else
         echo "calibration-cases: one TOWN and one OUT (see --help)" >&2; exit 2; fi; shift ;;
  esac
done
[ -n "$town" ] && [ -n "$out" ] || { echo "calibration-cases: needs TOWN and OUT (see --help)" >&2; exit 2; }
[ "$self_cal" = on ] || [ "$self_cal" = off ] ||
  { echo "calibration-cases: --self-calibration must be on or off" >&2; exit 2; }
[ -f "$town/survey/camera-truth.yml" ] ||
  { echo "calibration-cases: $town/survey has no camera-truth.yml (a realistic town is needed)" >&2; exit 2; }
for tool in indexer/sightfix-indexer client/sightfix; do
  [ -x "$build/$tool" ] || { echo "calibration-cases: $build/$tool is not built" >&2; exit 2; }
done
IFS=, read -r -a drive_list <<<"$drives"
for d in "${drive_list[@]}"; do
  [ -f "$town/$d/camera-truth.yml" ] || { echo "calibration-cases: $town/$d has no camera-truth.yml" >&2; exit 2; }
done
mkdir -p "$out/drives"
town="$(cd "$town" && pwd)"

# $1 drive, $2 exact|delivered: a copy of the drive folder whose camera.yml is that calibration.
variant() {
  local src="$town/$1" dst="$out/drives/$1-$2" f
  if [ ! -d "$dst" ]; then
    mkdir -p "$dst"
    for f in "$src"/*; do [ "$(basename "$f")" = camera.yml ] || ln -s "$f" "$dst/"; done
    if [ "$2" = exact ]; then cp "$src/camera-truth.yml" "$dst/camera.yml"; else cp "$src/camera.yml" "$dst/camera.yml"; fi
  fi
  echo "$dst"
}

for s in exact delivered; do
  map="$out/map-survey-$s"
  if [ ! -f "$map/catalog.sqlite" ]; then
    echo "== map, survey camera $s (self-calibration $self_cal; $out/map-survey-$s.log)"
    "$build/indexer/sightfix-indexer" build --drive "$(variant survey "$s")" --map "$map" \
      --self-calibration "$self_cal" --quiet --overwrite >"$out/map-survey-$s.log" 2>&1 ||
      { tail -3 "$out/map-survey-$s.log" >&2; exit 1; }
  fi
  for d in "${drive_list[@]}"; do
    for q in exact delivered; do
      run="$out/survey-$s.query-$q/$d"
      [ -f "$run/summary.json" ] && continue
      echo "   replay $d, query camera $q ($run.log)"
      mkdir -p "$(dirname "$run")"
      "$build/client/sightfix" replay --map "$map" --drive "$(variant "$d" "$q")" --prior none \
        --out "$run" >"$run.log" 2>&1 || { tail -3 "$run.log" >&2; exit 1; }
    done
  done
done

/usr/bin/python3 - "$out" "$town" "$self_cal" "${drive_list[@]}" <<'PY'
import csv, json, math, os, statistics, sys
out, town, self_cal, drives = sys.argv[1], sys.argv[2], sys.argv[3], sys.argv[4:]
def rows(path):
    with open(path) as f:
        return {r["image"]: r for r in csv.DictReader(f)}
# The survey poses' own horizontal error against the truth (equirectangular, fine at street scale).
got, truth = rows(os.path.join(town, "survey", "drive.csv")), rows(os.path.join(town, "survey", "truth.csv"))
errs = []
for image, t in truth.items():
    g = got.get(image)
    if g is None:
        continue
    lat = math.radians(float(t["lat"]))
    dn = math.radians(float(g["lat"]) - float(t["lat"])) * 6378137.0
    de = math.radians(float(g["lon"]) - float(t["lon"])) * 6378137.0 * math.cos(lat)
    errs.append(math.hypot(de, dn))
survey_m = statistics.median(errs)
lines = ["Town %s, self-calibration %s, no prior. Survey poses' own median error: %.2f m. Each "
         "cell: refined share; median error of refined fixes; their radius95 coverage. A "
         "simulated town: sightfix is a fallback aid, not a certified navigation source."
         % (os.path.basename(town.rstrip("/")), self_cal, survey_m), "",
         "| survey camera.yml | query camera.yml | " + " | ".join(d.replace("query-", "") for d in drives) + " |",
         "| --- | --- |" + " --- |" * len(drives)]
cases = {}
for s in ("exact", "delivered"):
    for q in ("exact", "delivered"):
        cells = []
        for d in drives:
            j = json.load(open(os.path.join(out, "survey-%s.query-%s" % (s, q), d, "summary.json")))
            r = j["refined_only"]
            share = j["refined"] / j["queries"] if j["queries"] else 0
            cases["%s/%s/%s" % (s, q, d)] = {"refined_share": share, "median_error_m": r["median_error_m"],
                                           "radius95_coverage": r["radius95_coverage"]}
            cells.append("%.0f %%, %s m, %s" % (100 * share,
                         "-" if r["median_error_m"] is None else "%.2f" % r["median_error_m"],
                         "-" if r["radius95_coverage"] is None else "%.2f" % r["radius95_coverage"]))
        lines.append("| %s | %s | %s |" % (s, q, " | ".join(cells)))
text = "\n".join(lines) + "\n"
open(os.path.join(out, "cases.md"), "w").write(text)
json.dump({"survey_median_error_m": survey_m, "self_calibration": self_cal, "cases": cases},
          open(os.path.join(out, "cases.json"), "w"), indent=2)
print(text, end="")
PY
