#!/usr/bin/env bash
# Benchmarks of the map and the engine (figures from one run; compare ratios, not absolute
# times: this is a shared 2-core machine). Not a test: it prints, it does not judge.
#  1. index build: images/s, bytes per image (global code, local features, 3D points); the
#     feature stage against bare OpenCV SIFT with --jobs 1 and 2; map size per km;
#  2. engine latency per query by stage against the bare OpenCV calls on the same data;
#  3. retrieval over a synthetic 100 000-image set, map-wide index against the prior's tiles and
#     against exact search;
#  4. the service: p50 through the socket against in process, throughput with 1 and 2 workers;
#     then TLS against plaintext (tests/bench/tls_bench_main.cc): throughput over persistent
#     connections, a new connection per call, handshakes per second;
#  5. the map-wide IVF-PQ index at 1 000 000 images (the town's descriptors plus seeded
#     distractors) against exact search: recall@1, ms per query by nprobe, memory, bytes per
#     image (tests/bench/ivf_bench_main.cc says how). Takes about 15 minutes and 3 GB of memory
#     on 2 cores; SIGHTFIX_BENCH_IVF=0 skips it, SIGHTFIX_BENCH_IVF_N sets the size.
# Usage: scripts/bench.sh [OUT_DIR]   (default out/bench; the 300 m town of seed 5 is made once)
set -euo pipefail
root="$(cd "$(dirname "$0")/.." && pwd)"
build="${BUILD_DIR:-$root/build}"
out="${1:-$root/out/bench}"
bash "$root/scripts/deps.sh"
cmake -S "$root" -B "$build" -DCMAKE_BUILD_TYPE=RelWithDebInfo >/dev/null
cmake --build "$build" -j "$(nproc)" --target sightfix-demo-route sightfix-indexer engine_bench \
  service_bench tls_bench indexer_bench ivf_bench
# The clean world, so that timings stay comparable with those recorded before realistic became
# the default (the realistic world changes image content, hence feature counts and timings).
if [ ! -f "$out/town/town.json" ]; then
  "$build/demo_route/sightfix-demo-route" --out "$out/town" --seed 5 --route-length-m 300 \
    --world clean >/dev/null
fi
echo "== index build (300 m town, seed 5, $(nproc) threads)"
"$build/indexer/sightfix-indexer" build --drive "$out/town/survey" --map "$out/map" --overwrite \
  --quiet --json >"$out/build.json"
python3 - "$out/build.json" <<'PY' 2>/dev/null || cat "$out/build.json"
import json, sys
s = json.load(open(sys.argv[1]))
b = s["bytes_per_image"]
print(f"{s['images']} images in {s['seconds']:.1f} s: {s['images_per_s']:.2f} images/s "
      f"(features {s['stage_s']['features']:.1f} s, model {s['stage_s']['model']:.1f} s, "
      f"structure {s['stage_s']['structure']:.1f} s, write {s['stage_s']['write']:.1f} s)")
print(f"bytes per image: global code {b['global_code']:.0f} ({s['codec']}), local features "
      f"{b['local_features']:.0f}, 3D points {b['points']:.0f}; tile files {b['tile_file']:.0f}")
PY
echo
echo "== indexing throughput against bare OpenCV feature extraction; map size per km"
"$build/tests/indexer_bench" --drive "$out/town/survey" --out "$out/indexer"

echo
echo "== engine latency against the bare library calls, and retrieval at scale"
"$build/tests/engine_bench" --map "$out/map" --drive "$out/town/query-day" --limit 40

echo
echo "== the service: socket against in process, throughput"
"$build/tests/service_bench" --map "$out/map" --drive "$out/town/query-day" --limit 20 \
  --seconds 15 2> >(grep -v '^{' >&2)

echo
echo "== TLS against plaintext on the query port: throughput, new connections, handshakes"
if [ ! -f "$out/pki/vehicle-bench.crt" ]; then
  rm -rf "$out/pki"
  bash "$root/scripts/make-certs.sh" "$out/pki" ca >/dev/null
  bash "$root/scripts/make-certs.sh" "$out/pki" server localhost DNS:localhost IP:127.0.0.1 >/dev/null
  bash "$root/scripts/make-certs.sh" "$out/pki" vehicle vehicle-bench >/dev/null
fi
"$build/tests/tls_bench" --map "$out/map" --drive "$out/town/query-day" --pki "$out/pki" \
  --seconds 10 2> >(grep -v '^{' >&2)

if [ "${SIGHTFIX_BENCH_IVF:-1}" = 1 ]; then
  echo
  echo "== the map-wide IVF-PQ index against exact search (distractors up to ${SIGHTFIX_BENCH_IVF_N:-1000000})"
  "$build/tests/ivf_bench" --map "$out/map" --out "$out/ivf" --n "${SIGHTFIX_BENCH_IVF_N:-1000000}" \
    --queries "$out/town/query-day,$out/town/query-dusk,$out/town/query-overcast" \
    --nlist 4096 --pq-bytes 32 --rerank 100 2> >(grep -v '^resizing' >&2)
fi
