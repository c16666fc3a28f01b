#!/usr/bin/env bash
# The robustness configuration: builds with clang-14 and
#  1. AddressSanitizer + UndefinedBehaviorSanitizer (plus libFuzzer's coverage hooks) in
#     build-san, runs the whole CTest suite there, then every fuzz target for FUZZ_SECONDS
#     (default 60) from its checked-in corpus;
#  2. ThreadSanitizer in build-tsan, and runs the server's concurrency tests there
#     (service_test: in-process server under 32 clients, shutdown, reload, slow and deaf
#     clients; wire_faults_test: server process killed and restarted under 8 clients).
# Usage: scripts/test-sanitizers.sh [asan|tsan|fuzz|all]   (default all)
set -euo pipefail
root="$(cd "$(dirname "$0")/.." && pwd)"
what="${1:-all}"
case "$what" in asan|tsan|fuzz|all) ;; -h|--help) sed -n '2,9p' "$0" | sed 's/^# \{0,1\}//'; exit 0 ;;
  *) echo "test-sanitizers.sh: unknown stage '$what' (asan, tsan, fuzz or all)" >&2; exit 2 ;; esac
bash "$root/scripts/deps.sh"
export OPENBLAS_NUM_THREADS=1 OMP_NUM_THREADS=1
san="$root/build-san" tsan="$root/build-tsan"
flags=(-DCMAKE_BUILD_TYPE=RelWithDebInfo "-DCMAKE_CXX_FLAGS_RELWITHDEBINFO=-O2 -g1 -DNDEBUG")

if [ "$what" = asan ] || [ "$what" = fuzz ] || [ "$what" = all ]; then
  CC=clang-14 CXX=clang++-14 cmake -S "$root" -B "$san" "${flags[@]}" -DSIGHTFIX_SANITIZE=ON -DSIGHTFIX_FUZZ=ON >/dev/null
  cmake --build "$san" -j "$(nproc)"
fi
if [ "$what" = asan ] || [ "$what" = all ]; then
  echo "== whole suite under AddressSanitizer + UndefinedBehaviorSanitizer"
  # Leaks are checked at exit of every test program; a report fails the test.
  (cd "$san" && ASAN_OPTIONS="detect_leaks=1:allocator_may_return_null=1:max_allocation_size_mb=2048" \
    UBSAN_OPTIONS="print_stacktrace=1:halt_on_error=1" ctest --output-on-failure --timeout 3000 -LE goal)
fi
if [ "$what" = fuzz ] || [ "$what" = all ]; then
  echo "== fuzz targets, ${FUZZ_SECONDS:-60} s each"
  BUILD_DIR="$san" bash "$root/scripts/fuzz.sh" all "${FUZZ_SECONDS:-60}"
fi
if [ "$what" = tsan ] || [ "$what" = all ]; then
  echo "== server concurrency tests under ThreadSanitizer"
  CC=clang-14 CXX=clang++-14 cmake -S "$root" -B "$tsan" "${flags[@]}" -DSIGHTFIX_TSAN=ON >/dev/null
  cmake --build "$tsan" -j "$(nproc)" --target service_test wire_faults_test sightfix-server \
    sightfix-indexer sightfix-demo-route
  (cd "$tsan" && TSAN_OPTIONS="halt_on_error=1:second_deadlock_stack=1:suppressions=$root/tests/robustness/tsan.supp" \
    ctest --output-on-failure --timeout 1800 -R '^(service_map|service_test|wire_faults_test)$')
fi
