#!/usr/bin/env bash
# mutants_list_test: every deliberate fault of tests/mutants/mutants.tsv still applies exactly
# once to the source tree, and every CTest an entry names exists in this build, so the mutation
# run (scripts/mutants.sh, outside CI) cannot rot silently when the code or a test is renamed.
# Usage: check_list.sh SOURCE_DIR BUILD_DIR
set -euo pipefail
src="$1" build="$2"
bash "$src/scripts/mutants.sh" --check | tail -1
bash "$src/scripts/mutants.sh" --list >/dev/null  # the README's first example
known="$(cd "$build" && ctest -N | sed -n 's/^ *Test *#[0-9]*: //p')"
missing=0
while IFS=$'\t' read -r id _ _ _ _ tests _; do
  for t in ${tests//,/ }; do
    grep -qx "$t" <<<"$known" || { echo "$id names the test $t, which this build does not have"; missing=1; }
  done
done < <(grep -v '^#' "$src/tests/mutants/mutants.tsv" | sed '/^$/d')
[ "$missing" = 0 ] && echo "every test the list names exists"
exit "$missing"
