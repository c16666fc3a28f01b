#!/usr/bin/env bash
# CTest fixture: a 150 m demo town (seed 17) and its map, shared by the service tests.
# 150 survey images are under the PQ training size, so this map also runs the SQ8 code path;
# zoom 18 (about 110 m tiles here) cuts it into several tiles, so one can be damaged.
# Usage: make_map.sh BUILD_DIR OUT_DIR
# With SIGHTFIX_SERVICE_MAP_FROM set to another tree's OUT_DIR, that town and map are copied
# instead (the sanitizer trees use the gcc tree's: the same bytes, minutes sooner).
set -euo pipefail
build="$1" out="$2"
rm -rf "$out"
if [ -n "${SIGHTFIX_SERVICE_MAP_FROM:-}" ] && [ -f "$SIGHTFIX_SERVICE_MAP_FROM/map/catalog.sqlite" ]; then
  mkdir -p "$out" && cp -r "$SIGHTFIX_SERVICE_MAP_FROM/town" "$SIGHTFIX_SERVICE_MAP_FROM/map" "$out/"
  rm -f "$out/map/.writer.lock"
  exit 0
fi
# The clean world: these tests check the service and its plumbing, not accuracy on hard streets.
"$build/demo_route/sightfix-demo-route" --out "$out/town" --seed 17 --route-length-m 150 --world clean \
  >/dev/null 2>&1
"$build/indexer/sightfix-indexer" build --drive "$out/town/survey" --map "$out/map" --zoom 18 --quiet
