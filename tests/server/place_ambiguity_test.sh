#!/usr/bin/env bash
# Place ambiguity, end to end: a map of two look-alike places. The service tests' survey is
# indexed twice, once where it was driven and once as if driven 400 m north (the same images,
# every latitude shifted), so each query image matches two places equally well. Without a prior
# the engine must not call a fix refined at either: every refined fix within 3 x its radius95
# of the truth, and the look-alike place named as the reason. With a 150 m prior around the
# truth the rival lies outside the circle and the fixes come back. Guards
# server/engine/place_ambiguity.cc (tests/mutants/mutants.tsv: ambiguity_check_skipped).
# Usage: place_ambiguity_test.sh BUILD_DIR SERVICE_DATA_DIR
set -u
build="$1" data="$2"
idx="$build/indexer/sightfix-indexer"
cli="$build/client/sightfix"
town="$data/town"
source "$(dirname "$0")/../lib/checks.sh"
source "$(dirname "$0")/../lib/twin_survey.sh"

# 400 m north: two places, farther apart than distinct_place_m (30 m) and than a prior's reach
# (radius 150 m plus offset up to 100 m).
twin_map "$idx" "$town/survey" 400 1 "$tmp/map" &&
  ok "map of two look-alike places built" || { cat "$tmp/build.txt"; bad "build"; }

# Per query: quality, error_m, radius95_m, reason, from fixes.csv; a line of counts.
tally() {
  "$py" - "$1/fixes.csv" <<'PY'
import csv, sys
rows = list(csv.DictReader(open(sys.argv[1])))
refined = [r for r in rows if r["quality"] == "refined"]
wrong = [r for r in refined if float(r["error_m"]) > 3 * float(r["radius95_m"])]
ambiguous = [r for r in rows if r["reason"].startswith("ambiguous")]
print(len(rows), len(refined), len(wrong), len(ambiguous))
PY
}
"$cli" replay --map "$tmp/map" --drive "$town/query-day" --out "$tmp/none" --prior none \
  >"$tmp/none.txt" 2>&1 || { tail -3 "$tmp/none.txt"; bad "replay without a prior"; }
read -r n refined wrong ambiguous < <(tally "$tmp/none")
echo "no prior: $n queries, $refined refined, $wrong confidently wrong, $ambiguous ambiguous"
[ "$wrong" = 0 ] && ok "no confidently wrong fix between look-alike places" \
  || bad "$wrong refined fixes beyond 3 x radius95"
[ "$ambiguous" -ge $((n / 2)) ] && ok "the look-alike place named as the reason" \
  || bad "only $ambiguous of $n answers say ambiguous"

"$cli" replay --map "$tmp/map" --drive "$town/query-day" --out "$tmp/prior" --prior noisy:150 \
  >"$tmp/prior.txt" 2>&1 || bad "replay with a prior"
read -r n refined wrong ambiguous < <(tally "$tmp/prior")
echo "150 m prior: $n queries, $refined refined, $wrong confidently wrong, $ambiguous ambiguous"
[ "$wrong" = 0 ] && [ "$refined" -ge $((n * 8 / 10)) ] \
  && ok "a prior that excludes the rival gets the fixes back" || bad "with a prior: $refined of $n refined"
finish
