#!/usr/bin/env bash
# The robustness configuration: builds with clang-14 and
#  1. AddressSanitizer + UndefinedBehaviorSanitizer (plus libFuzzer's coverage hooks) in
#     build-san, runs the whole CTest suite there, then every fuzz target for FUZZ_SECONDS
#     (default 60) from its checked-in corpus;
#  2. ThreadSanitizer in build-tsan, and runs the server's concurrency tests there
#     (service_test: the service and the client library in one process under 32 clients,
#     drain, reload, reconnect, slow and deaf clients; secure_wire_test: TLS from four threads
#     while the server rereads its TLS files, freshness, fair shares). Not wire_faults_test: a TSan-built
#     server answers a locate in 7-10 s (OpenCV and FAISS are not instrumented and run under
#     TSan's interceptors), past that test's deadlines.
#  ci: what scripts/test.sh runs in CI within its time budget: the ASan + UBSan build, the suite
#     without the tests that build towns or maps (label heavy; about 7x slower under ASan),
#     the service tests on the gcc tree's fixture map, every fuzz target for 12 s.
# Usage: scripts/test-sanitizers.sh [ci|asan|tsan|fuzz|all]   (default all)
set -euo pipefail
root="$(cd "$(dirname "$0")/.." && pwd)"
what="${1:-all}"
case "$what" in ci|asan|tsan|fuzz|all) ;; -h|--help) sed -n '2,13p' "$0" | sed 's/^# \{0,1\}//'; exit 0 ;;
  *) echo "test-sanitizers.sh: unknown stage '$what' (ci, asan, tsan, fuzz or all)" >&2; exit 2 ;; esac
bash "$root/scripts/deps.sh"
# (GNU nproc honours OMP_NUM_THREADS, so core counts are taken without it.)
export OPENBLAS_NUM_THREADS=1 OMP_NUM_THREADS=1
san="$root/build-san" tsan="$root/build-tsan"
flags=(-DCMAKE_BUILD_TYPE=RelWithDebInfo "-DCMAKE_CXX_FLAGS_RELWITHDEBINFO=-O2 -g1 -DNDEBUG")

if [ "$what" != tsan ]; then
  # CI runs no heavy test here: their programs (and the benchmarks) are left out of its build.
  heavy=ON; [ "$what" = ci ] && heavy=OFF
  CC=clang-14 CXX=clang++-14 cmake -S "$root" -B "$san" "${flags[@]}" -DSIGHTFIX_SANITIZE=ON \
    -DSIGHTFIX_FUZZ=ON -DSIGHTFIX_BUILD_HEAVY="$heavy" >/dev/null
  cmake --build "$san" -j "$(env -u OMP_NUM_THREADS -u OMP_THREAD_LIMIT nproc)"
fi
if [ "$what" = ci ] || [ "$what" = asan ] || [ "$what" = all ]; then
  labels="goal"
  [ "$what" = ci ] && labels="goal|heavy"
  # The service tests' town and map: the gcc tree's when it has them (same bytes, no 7x wait).
  [ -f "$root/build/tests/service_data/map/catalog.sqlite" ] && [ "$what" = ci ] &&
    export SIGHTFIX_SERVICE_MAP_FROM="$root/build/tests/service_data"
  echo "== the suite under AddressSanitizer + UndefinedBehaviorSanitizer (leaving out labels: $labels)"
  # Leaks are checked at exit of every test program; a report fails the test.
  (cd "$san" && ASAN_OPTIONS="detect_leaks=1:allocator_may_return_null=1:max_allocation_size_mb=2048" \
    UBSAN_OPTIONS="print_stacktrace=1:halt_on_error=1" ctest --output-on-failure --timeout 3000 \
    -j "$(env -u OMP_NUM_THREADS -u OMP_THREAD_LIMIT nproc)" -LE "$labels")
fi
if [ "$what" = ci ] || [ "$what" = fuzz ] || [ "$what" = all ]; then
  seconds="${FUZZ_SECONDS:-60}"
  # CI fuzzes with a fixed seed, so a crash it reports can be replayed by the same command.
  [ "$what" = ci ] && seconds="${FUZZ_SECONDS:-12}" && export FUZZ_SEED="${FUZZ_SEED:-1}"
  echo "== fuzz targets, $seconds s each"
  BUILD_DIR="$san" bash "$root/scripts/fuzz.sh" all "$seconds"
fi
if [ "$what" = tsan ] || [ "$what" = all ]; then
  echo "== server concurrency tests under ThreadSanitizer"
  CC=clang-14 CXX=clang++-14 cmake -S "$root" -B "$tsan" "${flags[@]}" -DSIGHTFIX_TSAN=ON >/dev/null
  cmake --build "$tsan" -j "$(env -u OMP_NUM_THREADS -u OMP_THREAD_LIMIT nproc)" --target service_test \
    secure_wire_test tile_cache_test
  # The fixture map comes from another tree: made under TSan it would take most of an hour.
  data=""
  for d in "$root/build/tests/service_data" "$san/tests/service_data"; do
    [ -f "$d/map/catalog.sqlite" ] && data="$d" && break
  done
  if [ -z "$data" ]; then
    [ -x "$san/indexer/sightfix-indexer" ] || { echo "tsan: run scripts/test.sh or the asan stage first (for the test map)" >&2; exit 1; }
    data="$san/tests/service_data"
    bash "$root/tests/service/make_map.sh" "$san" "$data"
  fi
  (cd "$tsan" && export SIGHTFIX_SERVICE_DATA="$data" \
    TSAN_OPTIONS="halt_on_error=1:second_deadlock_stack=1:suppressions=$root/tests/robustness/tsan.supp" &&
    tests/service_test && tests/secure_wire_test && tests/tile_cache_test)
fi
