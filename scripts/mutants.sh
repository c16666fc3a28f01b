#!/usr/bin/env bash
# Mutation check of the test suite: applies one deliberate fault at a time (tests/mutants/
# mutants.tsv: id, file, exact text, replacement, build targets, the CTests that must catch it,
# why) to a scratch copy of the tree, builds only that mutant's targets, runs its tests, reverts,
# and prints a table: mutant, killed (a test failed) or survived (every test passed), seconds.
# A survivor is a finding: the tests named beside it do not guard what the line says.
# Not part of CI.
#
# Usage: scripts/mutants.sh [--list] [--check] [--head] [--no-baseline] [ID...]
#   (no option)    every mutant in the list (engine_accuracy_test ~5 min, global_descriptor_test
#                  ~2 min, service_test and ivf_index_test ~1 min a run: name ids to skip them)
#   ID...          only these mutants
#   --list         the mutants, their files, tests and why; nothing is built
#   --check        every entry (or each ID) applies exactly once to the repository as it is now
#   --head         the scratch tree from HEAD only (default: HEAD plus the working tree's changes)
#   --no-baseline  skip the run of the chosen tests on the unmutated scratch tree
# The scratch tree is /work/mutants/main, built in /work/mutants/build/guards (MUTANTS_DIR moves
# both): beside /work/main and /work/build/<dir>, so ccache (base_dir=/work) shares objects.
# The first build is a full one; later runs rewrite only the files whose bytes changed. Tests
# that need the service_map fixture copy SIGHTFIX_SERVICE_MAP_FROM (default the main build's).
# Exit status: 0 when every mutant run was killed, 1 when one survived or a step failed, 2 on
# bad usage.
set -uo pipefail
root="$(cd "$(dirname "$0")/.." && pwd)"
list="$root/tests/mutants/mutants.tsv"
tool=(/usr/bin/python3 "$root/tests/mutants/mutant_tool.py")
scratch_root="${MUTANTS_DIR:-/work/mutants}"
src="$scratch_root/main" build="$scratch_root/build/guards" export_dir="$scratch_root/export"
export SIGHTFIX_SERVICE_MAP_FROM="${SIGHTFIX_SERVICE_MAP_FROM:-/work/build/main/tests/service_data}"
jobs="${JOBS:-2}"

usage() { sed -n '2,/^set -uo/p' "$0" | sed '$d; s/^# \{0,1\}//'; }

mode=run head_only=0 baseline=1 ids=()
for arg in "$@"; do
  case "$arg" in
    --help | -h) usage; exit 0 ;;
    --list) mode=list ;;
    --check) mode=check ;;
    --head) head_only=1 ;;
    --no-baseline) baseline=0 ;;
    -*) echo "unknown option $arg (--help lists them)" >&2; exit 2 ;;
    *) ids+=("$arg") ;;
  esac
done
[ "$mode" = list ] && exec "${tool[@]}" list "$list"
[ "$mode" = check ] && exec "${tool[@]}" check "$list" "$root" "${ids[@]}"
[ ${#ids[@]} -gt 0 ] || mapfile -t ids < <(grep -v '^#' "$list" | cut -f1 | sed '/^$/d')
"${tool[@]}" check "$list" "$root" "${ids[@]}" >/dev/null || {
  "${tool[@]}" check "$list" "$root" "${ids[@]}" | grep -v ' applies$'; exit 1; }

# HEAD (and the working tree's changes to tracked files, and untracked files not ignored) into
# export_dir, then into the scratch tree by content.
export_tree() {
  rm -rf "$export_dir" && mkdir -p "$export_dir" "$src"
  git -C "$root" archive HEAD | tar -x -C "$export_dir" || return 1
  if [ "$head_only" = 0 ]; then
    git -C "$root" diff --binary HEAD | git -C "$export_dir" apply --allow-empty - || return 1
    git -C "$root" ls-files --others --exclude-standard -z |
      (cd "$root" && xargs -0 -r cp --parents -t "$export_dir") || return 1
  fi
  "${tool[@]}" sync "$export_dir" "$src"
}

field() { "${tool[@]}" field "$list" "$1" "$2" | tr ',' ' '; }
tests_regex() { echo "^($(field "$1" tests | tr ' ' '|'))\$"; }

build_targets() {  # targets...; output in $build/mutant-build.log
  cmake --build "$build" -j"$jobs" --target "$@" >"$build/mutant-build.log" 2>&1
}

run_tests() {  # regex; output in $build/mutant-test.log
  (cd "$build" && ctest -R "$1" --output-on-failure >"$build/mutant-test.log" 2>&1)
}

export_tree || { echo "cannot make the scratch tree in $src" >&2; exit 1; }
cmake -S "$src" -B "$build" -DCMAKE_BUILD_TYPE=RelWithDebInfo \
  -DCMAKE_CXX_COMPILER_LAUNCHER=ccache >"$scratch_root/configure.log" 2>&1 ||
  { echo "configure failed: $scratch_root/configure.log" >&2; exit 1; }

all_targets=() all_tests=()
for id in "${ids[@]}"; do
  read -ra t <<<"$(field "$id" targets)"; all_targets+=("${t[@]}")
  read -ra t <<<"$(field "$id" tests)"; all_tests+=("${t[@]}")
done
mapfile -t all_targets < <(printf '%s\n' "${all_targets[@]}" | sort -u)
mapfile -t all_tests < <(printf '%s\n' "${all_tests[@]}" | sort -u)
echo "building the unmutated scratch tree: ${all_targets[*]}"
build_targets "${all_targets[@]}" || { echo "build failed: $build/mutant-build.log" >&2; exit 1; }
if [ "$baseline" = 1 ]; then
  echo "baseline: ${all_tests[*]}"
  run_tests "^($(IFS='|'; echo "${all_tests[*]}"))\$" ||
    { echo "the unmutated tree fails its tests: $build/mutant-test.log" >&2; exit 1; }
fi

results=() survived=0
for id in "${ids[@]}"; do
  start=$SECONDS
  "${tool[@]}" apply "$list" "$src" "$id" || { results+=("$id not-applied 0"); survived=1; continue; }
  read -ra targets <<<"$(field "$id" targets)"
  if ! build_targets "${targets[@]}"; then
    verdict=build-failed
    cp "$build/mutant-build.log" "$scratch_root/$id.build.log"
  elif run_tests "$(tests_regex "$id")"; then
    verdict=SURVIVED
  else
    verdict=killed
  fi
  cp "$build/mutant-test.log" "$scratch_root/$id.test.log" 2>/dev/null
  "${tool[@]}" revert "$list" "$src" "$id"
  [ "$verdict" = killed ] || survived=1
  results+=("$id $verdict $((SECONDS - start))")
  printf '%-30s %-12s %5ss  (%s)\n' "$id" "$verdict" "$((SECONDS - start))" "$(field "$id" tests)"
done
# Rebuild the reverted files so the next run starts from the unmutated objects.
build_targets "${all_targets[@]}" || echo "rebuilding the unmutated targets failed" >&2

echo
printf '%-30s %-12s %8s\n' mutant result seconds
for r in "${results[@]}"; do
  read -r id verdict secs <<<"$r"
  printf '%-30s %-12s %8s\n' "$id" "$verdict" "$secs"
done
exit "$survived"
