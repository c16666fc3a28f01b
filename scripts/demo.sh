#!/usr/bin/env bash
# The main job, end to end, as far as it is built: install what is missing, build, generate
# the demo town (survey drive, three query drives, GNSS streams, town.json, contact sheet) and
# print its summary. Later stages (map, server, replay) join here as they land.
# Usage: scripts/demo.sh [OUT_DIR] [extra sightfix-demo-route flags]   (default out/demo-town)
set -euo pipefail
root="$(cd "$(dirname "$0")/.." && pwd)"
build="${BUILD_DIR:-$root/build}"
out="${1:-$root/out/demo-town}"
shift || true
bash "$root/scripts/deps.sh"
cmake -S "$root" -B "$build" -DCMAKE_BUILD_TYPE=RelWithDebInfo >/dev/null
cmake --build "$build" -j "$(nproc)" --target sightfix-demo-route
echo "== generating the demo town in $out"
"$build/demo_route/sightfix-demo-route" --out "$out" "$@"
echo
echo "town parameters: $out/town.json"
echo "contact sheet:   $out/contact_sheet.png"
echo "Note: sightfix is a fallback aid, not a certified navigation source (see README, Safety)."
