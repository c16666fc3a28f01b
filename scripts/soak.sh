#!/usr/bin/env bash
# Soak: 64 concurrent clients against one sightfix-server for 5 minutes, good calls mixed with
# bad ones (undecodable images, NaN priors, unknown calibrations, garbage frames, lengths over
# the cap, frames cut short). Passes when the server never dies, answers every call the way it
# should, its RSS grows at most 10 % after a 60 s warm-up, it holds no more descriptors after
# the clients leave than before they came, and the last window's p99 locate latency is within
# 1.5 x of the first window after warm-up. Not part of CI's default run (it takes 5 minutes).
# Usage: scripts/soak.sh [--clients N] [--seconds S] [--think-ms MS]   (BUILD_DIR overrides ./build)
# Output: one line per 30 s window and a JSON verdict, also in BUILD_DIR/soak/.
set -euo pipefail
root="$(cd "$(dirname "$0")/.." && pwd)"
build="${BUILD_DIR:-$root/build}"
clients=64 seconds=300 think_ms=8000
while [ $# -gt 0 ]; do
  case "$1" in
    --clients) clients="$2"; shift 2 ;;
    --seconds) seconds="$2"; shift 2 ;;
    --think-ms) think_ms="$2"; shift 2 ;;
    -h|--help) sed -n '2,10p' "$0" | sed 's/^# \{0,1\}//'; exit 0 ;;
    *) echo "soak.sh: unknown option $1 (see --help)" >&2; exit 2 ;;
  esac
done
bash "$root/scripts/deps.sh"
cmake -S "$root" -B "$build" -DCMAKE_BUILD_TYPE=RelWithDebInfo >/dev/null
cmake --build "$build" -j "$(nproc)" --target sightfix-server sightfix-indexer sightfix-demo-route soak_load
out="$build/soak"
mkdir -p "$out"
data="$out/data"
if [ ! -f "$data/map/catalog.sqlite" ]; then
  echo "soak: making a 150 m demo town and its map (once)"
  bash "$root/tests/service/make_map.sh" "$build" "$data"
fi
"$build/server/sightfix-server" --map "$data/map" --listen 127.0.0.1:0 --http "" --workers "$(nproc)" \
  --queue 64 --max-connections 256 2>"$out/server.log" &
pid=$!
trap 'kill "$pid" 2>/dev/null || true' EXIT
source "$root/tests/lib/server_port.sh"
port="$(serving_port "$out/server.log" "$pid" || true)"
[ -n "$port" ] || { echo "soak: the server did not start: $(tail -3 "$out/server.log")" >&2; exit 1; }
echo "soak: $clients clients for $seconds s against pid $pid on port $port"
rc=0
"$build/tests/soak_load" --server "127.0.0.1:$port" --pid "$pid" --drive "$data/town/query-day" \
  --clients "$clients" --seconds "$seconds" --think-ms "$think_ms" | tee "$out/soak.txt" || rc=$?
kill -TERM "$pid"
if wait "$pid"; then echo "soak: the server drained and exited 0"; else echo "soak: server exit $?" >&2; rc=1; fi
trap - EXIT
echo "soak: verdict $( [ $rc -eq 0 ] && echo PASS || echo FAIL ); log $out/server.log"
exit $rc
