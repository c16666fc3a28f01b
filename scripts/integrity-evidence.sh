#!/usr/bin/env bash
# Integrity evidence over many demo towns: per seed a realistic town, its map, the overbound
# fitted on the town's day drive (`sightfix fit-integrity`), and every other query drive (dusk,
# overcast with another camera, night, off-map) replayed in process without a prior, held out
# from the fit. scripts/integrity_evidence.py then counts, per condition and over the aliasing
# district (the look-alike stretches), protected, usable, misleading and hazardous fixes,
# episodes (50 m street segments holding a usable fix) and the one-sided 95 % Clopper-Pearson
# bound over them, and availability by alert limit; OUT/evidence.md and evidence.json.
# A seed whose `done` file exists is not run again (an interrupted run resumes); images and
# tiles are deleted once a seed's figures are written.
#
# Usage: scripts/integrity-evidence.sh [OUT_DIR] [--seeds N] [--first S] [--route-length-m M]
#                                      [--alert-limit M] [--small]
#   OUT_DIR            default out/integrity-evidence
#   --seeds N          towns (20: the goal's count; 4-7 min each on 2 cores)
#   --first S          first seed (101: away from the seeds the tests use; seeds 103, 107,
#                      109 and 112 tuned the spread checks, docs/design.md 5.6)
#   --route-length-m M survey route (600: long enough for the look-alike stretches)
#   --alert-limit M    the horizontal alert limit every replay judges its fixes at (10: the
#                      widest the availability is given at; the place checks run only for
#                      fixes usable at it, so availability at every narrower limit is exact)
#   --small            320x240 images, 6 m survey spacing, no supersampling: for checking the
#                      script, not for quoting figures
# The goal's bound (1e-3: some 3 000 episodes with none misleading) needs about 110 towns at
# 27 episodes a town (measured over seeds 101-118), 8-13 hours on 2 cores. Split it over
# machines: each runs its own range (--first 101 --seeds 30, --first 131 --seeds 30, ...) into
# its own OUT_DIR, then `scripts/integrity_evidence.py OUT_A OUT_B ...` weighs them together.
# Every figure is from a simulated town; sightfix is a fallback aid, not a certified
# navigation source.
set -euo pipefail
root="$(cd "$(dirname "$0")/.." && pwd)"
build="${BUILD_DIR:-$root/build}"
out="$root/out/integrity-evidence"
seeds=20 first=101 length=600 alert=10
small=()
usage() { sed -n '2,/^set -euo/p' "$0" | sed '$d' | sed 's/^# \{0,1\}//'; }
while [ $# -gt 0 ]; do
  case "$1" in
    -h|--help) usage; exit 0 ;;
    --seeds) seeds="${2:?--seeds needs a value}"; shift 2 ;;
    --first) first="${2:?--first needs a value}"; shift 2 ;;
    --route-length-m) length="${2:?--route-length-m needs a value}"; shift 2 ;;
    --alert-limit) alert="${2:?--alert-limit needs a value}"; shift 2 ;;
    --small) small=(--image-size 320x240 --survey-spacing-m 6 --supersample 1); shift ;;
    -*) echo "integrity-evidence: unknown option $1 (see --help)" >&2; exit 2 ;;
    *) out="$1"; shift ;;
  esac
done
[[ "$seeds" =~ ^[1-9][0-9]*$ && "$first" =~ ^[0-9]+$ ]] ||
  { echo "integrity-evidence: --seeds must be >= 1 and --first a seed number" >&2; exit 2; }
for tool in demo_route/sightfix-demo-route indexer/sightfix-indexer client/sightfix; do
  [ -x "$build/$tool" ] || { echo "integrity-evidence: $build/$tool is not built" >&2; exit 2; }
done
mkdir -p "$out"

for ((seed = first; seed < first + seeds; ++seed)); do
  dir="$out/seed-$seed"
  [ -f "$dir/done" ] && { echo "== seed $seed: done before"; continue; }
  started=$SECONDS
  echo "== seed $seed: town (${length} m; log $dir/town.log)"
  rm -rf "$dir"
  mkdir -p "$dir"
  "$build/demo_route/sightfix-demo-route" --out "$dir/town" --seed "$seed" \
    --route-length-m "$length" "${small[@]}" >"$dir/town.log" 2>&1 ||
    { tail -3 "$dir/town.log" >&2; exit 1; }
  echo "   map ($dir/map.log)"
  "$build/indexer/sightfix-indexer" build --drive "$dir/town/survey" --map "$dir/map" --quiet \
    >"$dir/map.log" 2>&1 || { tail -3 "$dir/map.log" >&2; exit 1; }
  echo "   overbound fitted on query-day ($dir/fit.json)"
  if ! "$build/client/sightfix" fit-integrity --map "$dir/map" --drive "$dir/town/query-day" \
      --prior none --json >"$dir/fit.json" 2>"$dir/fit.log"; then
    # Too few fixes to fit: the town runs with the stated sigmas, said so in fit.json.
    tail -1 "$dir/fit.log"
    echo '{"overbound_scale": 1, "drive": "query-day", "written": false}' >"$dir/fit.json"
  fi
  for drive_dir in "$dir"/town/query-*; do
    drive="$(basename "$drive_dir")"
    echo "   replay $drive ($dir/$drive.log)"
    "$build/client/sightfix" replay --map "$dir/map" --drive "$drive_dir" --prior none \
      --alert-limits "$alert" --out "$dir/$drive" >"$dir/$drive.log" 2>&1 ||
      { tail -3 "$dir/$drive.log" >&2; exit 1; }
  done
  rm -rf "$dir/town/"*/images "$dir/map/tiles" "$dir"/query-*/report.html
  touch "$dir/done"
  echo "   seed $seed took $((SECONDS - started)) s"
done
/usr/bin/python3 "$root/scripts/integrity_evidence.py" "$out"
