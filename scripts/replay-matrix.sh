#!/usr/bin/env bash
# Replays every query drive of a demo town under every prior mode (none, noisy:150, gnss) in
# process against its map, and prints one line per run: the figures the evaluator issue's
# closing note asks for. Run scripts/demo.sh first (it makes the town and the map).
# Usage: scripts/replay-matrix.sh [TOWN_DIR]   (default out/demo-town; reports in TOWN_DIR/matrix)
set -euo pipefail
root="$(cd "$(dirname "$0")/.." && pwd)"
build="${BUILD_DIR:-$root/build}"
town="${1:-$root/out/demo-town}"
[ -d "$town/map" ] || { echo "no map in $town: run scripts/demo.sh first" >&2; exit 2; }
mkdir -p "$town/matrix"
printf '%-15s %-10s %7s %7s %7s %8s %8s %8s %6s %6s %6s %6s %9s %6s\n' drive prior queries avail \
  refined median_m p95_m max_m wrong r@1 cover nees spoof_hit false
for drive in query-day query-dusk query-overcast; do
  for prior in none noisy:150 gnss; do
    out="$town/matrix/$drive-${prior/:/}"
    "$build/client/sightfix" replay --map "$town/map" --drive "$town/$drive" --out "$out" \
      --prior "$prior" --json 2>/dev/null >"$out.json" || true
    /usr/bin/python3 - "$out/summary.json" "$drive" "$prior" <<'PY'
import json, sys
j = json.load(open(sys.argv[1]))
s = j["spoofing"]
print("%-15s %-10s %7d %7.3f %7d %8.3f %8.3f %8.3f %6d %6.3f %6.3f %6.2f %9s %6d" % (
    sys.argv[2], sys.argv[3], j["queries"], j["availability"], j["refined"], j["median_error_m"],
    j["p95_error_m"], j["max_error_m"], j["wrong_refined"], j["recall_at_1_25m"],
    j["radius95_coverage"], j["nees_mean"],
    "%d/%d" % (s["segments_flagged"], s["segments_true"]), s["false_alarms"]))
PY
  done
done
echo "reports: $town/matrix/*/report.html"
