#!/usr/bin/env bash
# Runs a libFuzzer target (clang-14, AddressSanitizer + UndefinedBehaviorSanitizer) for a while,
# starting from its checked-in seed corpus (tests/fuzz/corpus/TARGET) and a working corpus kept
# in the build folder between runs.
# Usage: scripts/fuzz.sh TARGET|all SECONDS   (BUILD_DIR overrides ./build-san; JOBS targets at once;
#        FUZZ_SEED=N repeats a run's random choices, 0 = a new seed each run)
# Targets: frame drive_csv gpx calibration rig tile fixes_csv integrity_fit.
# A crash leaves its input in BUILD_DIR/fuzz/crashes/TARGET/ and exits 1: fix the bug, then copy
# the input into tests/fuzz/regressions/TARGET/ so every build replays it from then on.
set -euo pipefail
root="$(cd "$(dirname "$0")/.." && pwd)"
build="${BUILD_DIR:-$root/build-san}"
targets=(frame drive_csv gpx calibration rig tile fixes_csv integrity_fit)
usage() { sed -n '2,10p' "$0" | sed 's/^# \{0,1\}//'; }
if [ $# -ne 2 ] || [[ "$1" = -h || "$1" = --help ]]; then usage; [ $# -eq 2 ] && exit 0 || exit 2; fi
target="$1" seconds="$2"
if ! [[ "$seconds" =~ ^[0-9]+$ ]] || [ "$seconds" -lt 1 ]; then echo "fuzz.sh: SECONDS must be a positive whole number" >&2; exit 2; fi
if [ "$target" = all ]; then
  selected=("${targets[@]}")
elif [[ " ${targets[*]} " == *" $target "* ]]; then
  selected=("$target")
else
  echo "fuzz.sh: unknown target '$target' (one of: ${targets[*]} all)" >&2
  exit 2
fi

bash "$root/scripts/deps.sh"
if [ ! -f "$build/CMakeCache.txt" ]; then
  CC=clang-14 CXX=clang++-14 cmake -S "$root" -B "$build" -DCMAKE_BUILD_TYPE=RelWithDebInfo \
    -DCMAKE_CXX_FLAGS_RELWITHDEBINFO="-O2 -g1 -DNDEBUG" -DSIGHTFIX_SANITIZE=ON -DSIGHTFIX_FUZZ=ON >/dev/null
fi
cmake --build "$build" -j "$(env -u OMP_NUM_THREADS -u OMP_THREAD_LIMIT nproc)" --target "${selected[@]/#/fuzz_}"

# An allocation over 2 GiB fails (operator new throws) instead of being granted lazily: OpenCV's
# YAML parser asks for 16 GiB on some malformed 200-byte files, which plain glibc refuses and
# the readers must report as unreadable (tests/fuzz/regressions/calibration/).
export ASAN_OPTIONS="${ASAN_OPTIONS:-detect_leaks=1:allocator_may_return_null=1:max_allocation_size_mb=2048}"
export UBSAN_OPTIONS="${UBSAN_OPTIONS:-print_stacktrace=1:halt_on_error=1}"
export OPENBLAS_NUM_THREADS=1 OMP_NUM_THREADS=1
# One target: its summary line on stdout, 1 on a crash (input kept, first error line shown).
run_one() {
  local t="$1" work="$build/fuzz/corpus/$1" crashes="$build/fuzz/crashes/$1" log="$build/fuzz/$1.log"
  mkdir -p "$work" "$crashes"
  if "$build/tests/fuzz/fuzz_$t" -seed="${FUZZ_SEED:-0}" -max_total_time="$seconds" -timeout=10 -rss_limit_mb=2048 -malloc_limit_mb=4096 \
      -max_len=65536 -print_final_stats=1 -artifact_prefix="$crashes/" \
      "$work" "$root/tests/fuzz/corpus/$t" >"$log" 2>&1; then
    local runs cov
    runs=$(grep -o 'stat::number_of_executed_units: *[0-9]*' "$log" | grep -o '[0-9]*$' || echo '?')
    cov=$(grep -o 'cov: [0-9]*' "$log" | tail -1 | grep -o '[0-9]*' || echo '?')
    echo "fuzz $t: $runs executions in ${seconds} s, coverage $cov edges, corpus $(ls "$work" | wc -l) inputs, no crash"
  else
    echo "fuzz $t: CRASH; input kept in $crashes/ (log $log):"
    ls -1 "$crashes"
    grep -m1 -E "ERROR: (AddressSanitizer|libFuzzer)|runtime error|invariant failed" "$log" || tail -20 "$log"
    return 1
  fi
}
# As many targets at once as there are cores (JOBS overrides).
jobs="${JOBS:-$(env -u OMP_NUM_THREADS -u OMP_THREAD_LIMIT nproc)}"
echo "fuzz: ${selected[*]}, ${seconds} s each, $jobs at a time (logs in $build/fuzz/)"
status=0
pids=()
for t in "${selected[@]}"; do
  run_one "$t" &
  pids+=($!)
  if [ ${#pids[@]} -ge "$jobs" ]; then
    wait "${pids[0]}" || status=1
    pids=("${pids[@]:1}")
  fi
done
for p in "${pids[@]}"; do wait "$p" || status=1; done
exit $status
