#!/usr/bin/env bash
# A near alias, end to end: the service tests' survey (every other frame, to keep the test
# short) indexed twice, once where it was driven and once as if driven 15 m north (the same
# images, every latitude shifted): each place has a twin nearer than distinct_place_m (30 m), as
# a terrace of one design has its houses. Every check before the nearby one sees one place (the
# twin's references lie within 30 m, so they are no rival), and a fix at either copy carries the
# small levels of a good one. The nearby check must find the other copy and flag the fix: no
# usable fix more than 3 m from the truth, and most fixes flagged place_ambiguity. Guards the
# nearby check (server/engine/place_ambiguity.cc SelectNearby, KeepDisagreeing, NearbyPose,
# NearbyAliasReason; tests/mutants/mutants.tsv: nearby_check_skipped, nearby_agreeing_kept).
# Usage: near_alias_test.sh BUILD_DIR SERVICE_DATA_DIR
set -u
build="$1" data="$2"
idx="$build/indexer/sightfix-indexer"
cli="$build/client/sightfix"
town="$data/town"
source "$(dirname "$0")/../lib/checks.sh"
source "$(dirname "$0")/../lib/twin_survey.sh"

# 15 m north: nearer than distinct_place_m, farther than any usable fix's error.
twin_map "$idx" "$town/survey" 15 2 "$tmp/map" &&
  ok "map with every place twice, 15 m apart, built" || { cat "$tmp/build.txt"; bad "build"; }

# usable fixes, of them more than 3 m off, and place_ambiguity fixes, from fixes.csv.
tally() {
  "$py" - "$1/fixes.csv" <<'PY'
import csv, sys
rows = list(csv.DictReader(open(sys.argv[1])))
usable = [r for r in rows if r["integrity"] == "usable"]
far = [r for r in usable if float(r["error_m"]) > 3]
print(len(rows), len(usable), len(far), sum(r["integrity"] == "place_ambiguity" for r in rows))
PY
}
"$cli" replay --map "$tmp/map" --drive "$town/query-day" --out "$tmp/none" --prior none \
  >"$tmp/none.txt" 2>&1 || { tail -3 "$tmp/none.txt"; bad "replay without a prior"; }
read -r n usable far flagged < <(tally "$tmp/none")
echo "no prior: $n queries, $usable usable ($far more than 3 m off), $flagged place_ambiguity"
[ "$far" = 0 ] && ok "no usable fix at the twin place" || bad "$far usable fixes more than 3 m off"
[ "$flagged" -ge $((n / 3)) ] && ok "the twin 15 m away flags the fixes" \
  || bad "only $flagged of $n fixes flagged place_ambiguity"
finish
