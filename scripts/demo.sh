#!/usr/bin/env bash
# The main job, end to end, as far as it is built: install what is missing, build, generate the
# demo town (the realistic world unless told --world clean: survey drive, query drives, GNSS
# streams, town.json, contact sheet), build its map with sightfix-indexer, start sightfix-server
# on it, locate a few query images of each drive through the server with sightfix locate
# --server, printing each fix's error against the drive's ground truth, replay the whole dusk
# query drive through the server with sightfix replay (metrics, GNSS spoofing monitor,
# report.html), and stop the server cleanly (SIGTERM: it drains and exits 0).
# Usage: scripts/demo.sh [OUT_DIR] [extra sightfix-demo-route flags]   (default out/demo-town)
set -euo pipefail
root="$(cd "$(dirname "$0")/.." && pwd)"
build="${BUILD_DIR:-$root/build}"
out="${1:-$root/out/demo-town}"
shift || true
bash "$root/scripts/deps.sh"
cmake -S "$root" -B "$build" -DCMAKE_BUILD_TYPE=RelWithDebInfo >/dev/null
cmake --build "$build" -j "$(nproc)" --target sightfix-demo-route sightfix-indexer sightfix \
  sightfix-server

echo "== 1/5 generating the demo town in $out"
"$build/demo_route/sightfix-demo-route" --out "$out" "$@"

echo
echo "== 2/5 building its map from the survey drive"
"$build/indexer/sightfix-indexer" build --drive "$out/survey" --map "$out/map" --overwrite

echo
echo "== 3/5 starting sightfix-server on the map (127.0.0.1, ports 7411 and 7412)"
listen="${SIGHTFIX_DEMO_LISTEN:-127.0.0.1:7411}"
http="${SIGHTFIX_DEMO_HTTP:-127.0.0.1:7412}"
"$build/server/sightfix-server" --map "$out/map" --listen "$listen" --http "$http" \
  2>"$out/server.log" &
server_pid=$!
trap 'kill -TERM "$server_pid" 2>/dev/null || true' EXIT
for _ in $(seq 1 100); do
  grep -q '"serving"' "$out/server.log" 2>/dev/null && break
  kill -0 "$server_pid" 2>/dev/null || { cat "$out/server.log"; exit 1; }
  sleep 0.1
done
"$build/client/sightfix" describe --server "$listen"

echo
echo "== 4/5 locating query images through the server (prior: 150 m circle centred 60 m off the truth)"
# Rows 6, 26 and 46 of each query drive; the prior's centre is moved 60 m north of the truth
# (1 degree of latitude is about 111 km; common practice), as a dead-reckoning prior might be.
for drive in query-day query-dusk query-overcast query-night; do
  [ -d "$out/$drive" ] || continue  # query-night: realistic world only
  for row in 6 26 46; do
    line="$(sed -n "${row}p" "$out/$drive/drive.csv")"
    [ -n "$line" ] || continue
    IFS=, read -r image _ lat lon _ <<<"$line"
    prior_lat="$(awk -v a="$lat" 'BEGIN { printf "%.7f", a + 60 / 111132 }')"
    printf '%-15s %-18s ' "$drive" "$image"
    "$build/client/sightfix" locate --server "$listen" --image "$out/$drive/$image" \
      --camera "$out/$drive/camera.yml" --prior "$prior_lat,$lon,150" --truth "$lat,$lon" --json |
      awk -F'[:,]' '/"quality"/ { q = $2 } /"error_m"/ { e = $2 } /"radius95_m"/ { r = $2 }
                    /"reason"/ { why = $0 } /"total"/ { t = $2 }
                    END {
                      gsub(/[ "]/, "", q)
                      if (e == "") { sub(/.*"reason": "/, "", why); sub(/",?$/, "", why); printf "%-8s %s\n", q, why }
                      else printf "%-8s error %.3f m, radius95 %.3f m, %.0f ms\n", q, e, r, t
                    }' || true
  done
done

echo
echo "== 5/5 replaying the whole dusk query drive through the server (prior: noisy:150)"
"$build/client/sightfix" replay --server "$listen" --drive "$out/query-dusk" \
  --out "$out/report-dusk" --prior noisy:150

echo
echo "stopping the server (SIGTERM: answers what is in flight, then exits)"
kill -TERM "$server_pid"
wait "$server_pid" && echo "server exited cleanly" || echo "server exited with status $?"
trap - EXIT

echo
echo "town parameters: $out/town.json"
echo "contact sheet:   $out/contact_sheet.png"
echo "map:             $out/map (catalog.sqlite, tiles/)"
echo "server log:      $out/server.log (one JSON line per call)"
echo "route report:    $out/report-dusk/report.html (open it in a browser)"
echo "Note: sightfix is a fallback aid, not a certified navigation source; defer to the vehicle's"
echo "safety case and local regulations (see README, Safety)."
